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
or is still short; for fewer hires, whether the need fell, a budget year's cap, an office's
hiring slots or its seats are full and what the new plan puts there instead (on the other
funding too), or how the gap is covered now; for a moved hire, the gap at both starts and
what holds the old one back.  Where nothing in the tables explains a change and the solves
stopped short of proof by more than the change is worth, the reason says so; else it is
marked "(review)".

Every figure is looked up in dictionaries built once per call
(:mod:`rebalance.analysis.change_facts`), so a re-plan of thousands of changes costs one pass
over each table.
"""

from __future__ import annotations

import pandas as pd

from rebalance.analysis.change_facts import (
    BASE_AND_SCENARIO,
    FORCED,
    OLD_AND_NEW,
    PlanNames,
    _Facts,
    _people,
)
from rebalance.analysis.reasons import _EPS, Reasons, _describe, _fte, _texts
from rebalance.instance import Instance, RuledOut
from rebalance.numbers import money_amount
from rebalance.plan import Plan

__all__ = ["BASE_AND_SCENARIO", "FORCED", "OLD_AND_NEW", "PlanNames", "change_reasons"]


# -- forced changes: the data leave the old decision no place (replan_model's `forced`) ---------

# How a forced change's reason says each rule of the data (Instance.move_ruled_out and
# hire_ruled_out); {who}, {skill}, {office} and {period} are filled in.
_RULED_OUT_WORDS: dict[RuledOut, str] = {
    "left": "{who} has left by then (staff.csv last_period)",
    "may_not_detail": "staff.csv now says {who} may not go on detail (can_detail)",
    "no_details": "settings.toml now allows no details",
    "may_not_relocate": "staff.csv now says {who} may not be reassigned (can_relocate)",
    "may_not_hire": "offices.csv now says {office} may not hire",
    "before_time_to_hire": "{skill}'s time to hire now rules out a start in {period}",
    "no_demand": "no {skill} demand is left at {office} from {period} on for a hire to cover",
    "no_vacancy": "no funded {skill} vacancy is left at {office}",
}


def _forced(rule: RuledOut, who: str = "", skill: str = "", office: str = "",
            period: str = "") -> str:
    return f"{FORCED}: " + _RULED_OUT_WORDS[rule].format(who=who, skill=skill, office=office,
                                                          period=period)


def _detail_ruled_out(f: _Facts, person: str, office: str, t: int) -> str:
    p = f.people.get(person)
    if p is None:
        return f"{FORCED}: {person} is no longer in staff.csv"
    ruled_out = f.i.move_ruled_out(p, t, "detail")
    if ruled_out:
        return _forced(ruled_out[0], who=person)
    if not {k for k, _ in p.skills} & f.wanted.get((office, t), set()):
        return (f"{FORCED}: {office} has no demand left for {person}'s skills in "
                f"{f.names[t]}")
    return ""


def _move_ruled_out(f: _Facts, person: str, t: int) -> str:
    p = f.people.get(person)
    if p is None:
        return f"{FORCED}: {person} is no longer in staff.csv"
    ruled_out = f.i.move_ruled_out(p, t, "reassignment")
    # "May not be reassigned" is said before "has left" here.
    for rule in ("may_not_relocate", "left"):
        if rule in ruled_out:
            return _forced(rule, who=person)
    return ""


def _hire_ruled_out(f: _Facts, office: str, skill: str, s: int, funding: str) -> str:
    """Why the model has no hire column there (:meth:`Instance.hire_ruled_out`), if it has
    none."""
    if office not in {x.name for x in f.i.offices}:
        return f"{FORCED}: {office} is no longer in offices.csv"
    ruled_out = f.i.hire_ruled_out(office, skill, s, new_position=funding != "vacancy")
    if ruled_out:
        return _forced(ruled_out[0], skill=skill, office=office, period=f.names[s])
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
        if back:
            # Their share apart from the rest's: "its own staff give 2.200 more (E0099, E0101
            # no longer detailed out)" had read as theirs where they gave 1.826 of it.
            theirs = sum(f.ctx.person_out[(p, t)][skill] for p in back)
            rest = own_new - own_old - theirs
            causes.append(f"{_people(back)} no longer detailed out "
                          f"{'gives' if len(back) == 1 else 'give'} {_fte(theirs)} FTE"
                          + (f"; the rest of its own staff give {_fte(abs(rest))} FTE "
                             f"{'more' if rest > 0 else 'less'}" if abs(rest) > 5e-4 else ""))
        else:
            causes.append(f"its own staff give {_fte(own_new - own_old)} FTE more")
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


def _held_back(f: _Facts, person: str, office: str, t: int, *, one_period: bool = True) -> str:
    """The binding limits of the new plan that keep ``person`` from a detail to ``office`` in
    ``t``, in words; or what the tables show where none is.  ``one_period``: the change is
    that one detail period (not a move), so the shortfall it could take off is measured."""
    p = f.people[person]
    name = f.names[t]
    home = f.home(p, t)
    year = f.i.periods[t].year
    # In reasons.csv's words for a binding limit.
    found = [_describe(u, f.i) for u in (f.limit("seats", office, name),
                                         f.limit("away_share", home, name),
                                         f.limit("moves_budget", year))
             if u is not None]
    # A moves budget binds where less is left than the cheapest detail; this route may cost
    # more than what is left (the storm's plan left 2,000 of 2027's, a dropped detail cost
    # 9,000: said "no binding limit (review)").
    budget = f.uses.get(("moves_budget", year, ""))
    cost = f.i.detail_cost_per_period(home, office) if home != office else 0.0
    if (budget is not None and f.limit("moves_budget", year) is None
            and budget.cap - budget.used < cost - _EPS):
        # In reasons.csv's words for the budget, then what is left against this route.
        money = f.i.money.currency
        found.append(f"{_describe(budget, f.i)}: {money_amount(budget.cap - budget.used, money)} "
                     f"left, less than the {money_amount(cost, money)} a detail from {home} to "
                     f"{office} costs")
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
    # What one period of theirs could take off the weighted shortfall there, at most: each
    # skill's shortfall up to their FTE at it.
    fte = f.i.available_fte(p, t)
    gain = sum(min(fte * p.proficiency(k), f.ctx.short.get((office, k, t), 0.0))
               * f.priority.get((office, k, t), 1.0) for k, _ in p.skills)
    gap = f.within_gap(gain, "the detail") if one_period else ""
    return ("the tables show no binding limit that keeps them from it"
            + (f"; {gap}" if gap else " (review)"))


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
    why = (_replaced_on_route(f, person, home, office, skill, t)
           or _meets_no_less(f, person, home, office, skill, t)
           or _held_back(f, person, office, t))
    return f"{doing}; {there}; {why}"


def _replaced_on_route(f: _Facts, person: str, home: str, office: str, skill: str,
                       t: int) -> str:
    """Who the new plan details from the same home to ``office`` in ``t`` for ``skill`` in
    their place (the one giving most there), with both proficiencies; "" where no one.  A
    swap on one route had read as held back by the moves budget."""
    old = f.old_visitors.get((office, skill, t), {})
    new = f.new_visitors.get((office, skill, t), {})
    others = [(out, q) for q, out in new.items() if q != person and q not in old
              and q in f.people and f.home(f.people[q], t) == home]
    if not others:
        return ""
    _, q = max(others)
    theirs, mine = f.people[q].proficiency(skill), f.people[person].proficiency(skill)
    return f"replaced on the same route by {q} ({skill} {theirs:g} against their {mine:g})"


def _rerouted_detail(f: _Facts, person: str, before: str, after: str, skill: str,
                     t: int) -> str:
    old_office, new_office = before.split(" -> ")[-1], after.split(" -> ")[-1]
    forced = _detail_ruled_out(f, person, old_office, t)
    # The skill the row names (most FTE of time there: replan._changes's rule), not the one
    # of most output: a reason had spoken of inspection beside a row of safety_review.
    k = f.new_main.get((person, f.names[t], new_office), "") or skill
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
        short_there = f"{stays}; {office} is short of their skills in {short} of them without them"
        if needed:
            return short_there
        return f"{short_there}, and {_held_back(f, person, office, left[0], one_period=False)}"
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
    # Said once, in the closing clause about the same demand.
    fell = (f"{_fte(old_need - need)} FTE-periods lower than {f.plans.old} was made for"
            if need < old_need - _EPS else "")
    # What one such hire costs the hiring budget of each year it is paid in, against what the
    # new plan leaves of that year's budget.
    cost = f.hire_cost(skill, funding, {s: 1})
    short_of = [(u, cost[y]) for y in sorted(cost)
                if (u := f.uses.get(("hiring_budget", y, ""))) is not None
                and u.cap - u.used < cost[y] - _EPS]
    if short_of:
        years = {u.where for u, _ in short_of}
        # Only hires that cost those years more in the new plan than in the old, net of each
        # office, skill and funding's starts: a hire moved out of a short year, or within
        # one, had been named as bought instead.
        gained = sorted((t, o, k2, n) for (o, k2, fund), delta in f.hire_delta.items()
                        if any(c > _EPS for y, c in f.hire_cost(k2, fund, delta).items()
                               if y in years)
                        for t, n in delta.items() if n > 0)
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
    # A hire holds its seat from its start to the horizon's end (limits.limit_use).
    seats, seated = f.seats_full(office, range(s, T))
    if seats:
        parts.append(f"a hire there would hold a seat from {f.names[s]} on, and {seats}")
    paid = parts[:]  # a budget, the slots or the seats: said only where a gap is left
    parts.clear()
    # The same start on the other funding: hire_gain nets fundings, so it was not seen.
    other = "new" if funding == "vacancy" else "vacancy"
    switched = f.hire_delta.get((office, skill, other), {}).get(s, 0)
    if switched > 0:
        parts.append(f"{switched} {skill} {'hire' if switched == 1 else 'hires'} "
                     f"{'as a new position' if other == 'new' else 'filling a funded vacancy'}"
                     f" {'starts' if switched == 1 else 'start'} there then instead")
    elsewhen = [(t, n) for t, n in f.hire_gain.get((office, skill), ()) if t != s]
    if elsewhen:
        n = sum(n for _, n in elsewhen)
        parts.append(f"{n} {skill} {'hire starts' if n == 1 else 'hires start'} there in "
                     f"{', '.join(f.names[t] for t, _ in elsewhen)} instead")
    short_new = sum(f.ctx.short.get((office, skill, t), 0.0) for t in range(s, T))
    # Those named as taking the seats (said where a gap is left) are not named again.
    came = sorted({p for t in range(s, T) for p in f.new_visitors.get((office, skill, t), {})
                   if p not in f.old_visitors.get((office, skill, t), {})}
                  - (seated if short_new > _EPS else set()))
    if came:
        parts.append(f"{_people(came)} detailed in")
    head = f"{skill} demand at {office} from {f.names[s]} on is " + (f"{fell}, and " if fell
                                                                      else "")
    if short_new <= _EPS:
        return f"{head}met without it" + (f": {'; '.join(parts)}" if parts else "")
    text = f"{head}left {_fte(short_new)} FTE-periods short"
    if not fell and not paid and not switched:
        # What one such hire could take off the weighted shortfall left, at most.
        gain = sum(min(f.i.hire_fte(skill, office, s, t), f.ctx.short.get((office, skill, t), 0.0))
                   * f.priority.get((office, skill, t), 1.0) for t in range(s, T))
        gap = f.within_gap(gain, "the hire")
        text += (", and no binding limit found that keeps the hire"
                 + (f"; {gap}" if gap else " (review)"))
    return "; ".join([*paid, *parts, text])


def _moved_hire(f: _Facts, office: str, skill: str, funding: str, s_old: int,
                s_new: int) -> str:
    """Why hires of ``skill`` at ``office`` start in ``s_new`` instead of ``s_old``: the gap a
    hire is for (demand above the staff's output, hires left out, as the new hire's own reason
    measures it) at both starts in each plan, and, for a later start, the new plan's binding
    limits at the old start (a hire from then would hold a seat in every period to the new
    start, a hiring slot then, and what the earlier start costs each year more)."""
    names = f.names

    def gaps(t: int) -> tuple[str, str]:
        # Both plans on the current data, as replan.csv scores the old plan: its own coverage
        # table is the data it was made for (a storm's gap had read as 0.000 there).
        key = (office, skill, t)
        return (_fte(max(0.0, f.demand.get(key, 0.0) - f.old_staff_now.get(key, 0.0))),
                _fte(max(0.0, f.ctx.gap_before_hires(office, skill, t))))

    (old_a, new_a), (old_b, new_b) = gaps(s_old), gaps(s_new)
    parts = [f"{office}'s {skill} demand above its staff's output (hires left out) is "
             f"{old_a} FTE in {names[s_old]} and {old_b} in {names[s_new]} in {f.plans.old}, "
             f"{new_a} and {new_b} in {f.plans.new}"]
    if s_new < s_old:  # the hire still covers the old start: no limit there keeps it out
        return parts[0]
    found = []
    seats, _ = f.seats_full(office, range(s_old, s_new))
    if seats:
        found.append(seats)
    if f.limit("max_hires", office, names[s_old]) is not None:
        others = [f"{n} x {k}" for (o, k), starts in f.hire_gain.items() if o == office
                  for t, n in starts if t == s_old]
        found.append(f"the hiring slots at {office} in {names[s_old]} are full"
                     + (f", taken by {_people(others)} more" if others else ""))
    # What a start at s_old costs each year beyond one at s_new (onboarding moves year if the
    # year differs; a new position pays one more period's salary per period brought forward).
    # A budget is named only where what it leaves is less than that: a vacancy hire moved
    # within 2027 had been said to be held back by 2027's budget, at no cost more there.
    extra = f.hire_cost(skill, funding, {s_old: 1, s_new: -1})
    money = f.i.money.currency
    for y in sorted(extra):
        u = f.uses.get(("hiring_budget", y, ""))
        if u is not None and extra[y] > _EPS and u.cap - u.used < extra[y] - _EPS:
            found.append(f"the {_describe(u, f.i)} leaves less than the "
                         f"{money_amount(extra[y], money)} more a start then costs in {y}")
    if found:
        parts.append(f"a start in {names[s_old]} is held back: {'; '.join(found)}")
    elif f.ctx.short.get((office, skill, s_old), 0.0) > _EPS:
        parts.append(f"no binding limit found in {names[s_old]} that keeps it there (review)")
    else:
        parts.append(f"{f.plans.new} leaves no {skill} shortfall at {office} in "
                     f"{names[s_old]} without it")
    return "; ".join(parts)


# -- the column ---------------------------------------------------------------------------------

def change_reasons(instance: Instance, old: Plan, new: Plan, changes: pd.DataFrame,
                   new_reasons: Reasons, plans: PlanNames = OLD_AND_NEW,
                   old_work_now: pd.DataFrame | None = None,
                   shortfall_gap: float | None = None) -> list[str]:
    """One short reason per row of ``changes`` (``replan``'s ``CHANGE_COLUMNS`` but
    ``reason``), from the re-plan's ``instance``, the ``old`` and ``new`` plans and the new
    plan's ``new_reasons`` (:func:`reasons` of it).

    ``plans``: what the reasons call the two plans (``compare`` passes
    :data:`BASE_AND_SCENARIO`, with the base plan as ``old``, the scenario's as ``new`` and
    its data as ``instance``).  ``old_work_now``: the old plan's work table on
    ``instance``'s data (:func:`~rebalance.analysis.change_facts.work_on_current_data`),
    where the caller has made it already; else it is made here.  ``shortfall_gap``: the
    larger relative gap on weighted shortfall of the two plans' solves (``summary.json``'s
    stage gaps), so a change no limit explains and worth less than it says so; None
    (unknown) leaves such a change marked for review."""
    f = _Facts(instance, old, new, new_reasons, plans, old_work_now, shortfall_gap)
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
                    _, _, when = before.partition(" from ")
                    forced = _move_ruled_out(f, who, f.ix[when])
                    text = f"{forced}; {text}" if forced else text
        else:
            funding = kind[kind.find("(") + 1:-1]
            if change == "fewer":
                text = _fewer_hires(f, who, skill, t, funding)
            else:
                text = (f.hire_why.get((who, skill, period, funding), "")
                        or "no reason found for it in reasons.csv (review)")
                if change == "moved":
                    old_start = before.split(" in ")[-1]
                    forced = _hire_ruled_out(f, who, skill, f.ix[old_start], funding)
                    why = forced or _moved_hire(f, who, skill, funding, f.ix[old_start], t)
                    text = f"starts in {period} instead of {old_start}; {why}; {text}"
        out.append(text)
    return out
