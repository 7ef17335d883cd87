"""A short reason for every hire, detail run and reassignment, and for every remaining shortfall
the limits that keep it from being covered.

Reasons are read off the plan tables and the instance (never off solver objects), so they can
be checked the way the verifier checks a plan.  A shortfall cites only limits that
:func:`rebalance.analysis.limits.limit_use` shows binding (a hiring budget: one with less left
than a start that could cover it costs that year), and only those that could matter to it: a
hire that could cover it is stopped by hiring budgets, hiring slots, seats or time to hire; a
detail by the away share at offices with people of the skill, the moves budget of that year
(where what is left pays for no detail into the office),
or seats at the office.  Budgets, slots and seats are cited only where they stop every start
that could cover it (:meth:`_Binding.budgets_holding`).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass

import pandas as pd

from rebalance.analysis.change_facts import _EPS, _both_ways, _Context, _floats, _texts
from rebalance.analysis.limits import BUDGET_LIMITS, LIMIT_NAMES, LimitUse, hire_rows, limit_use
from rebalance.instance import Instance, Person
from rebalance.numbers import money_amount, number_text, share_of
from rebalance.plan import Plan

__all__ = ["REASON_COLUMNS", "Reasons", "limit_key", "reasons"]

REASON_COLUMNS = ("action", "subject", "office", "skill", "first_period", "last_period",
                  "amount", "reason", "binding_limits")

@dataclass(frozen=True)
class Reasons:
    table: pd.DataFrame  # REASON_COLUMNS (``reasons.csv``)
    limits: tuple[LimitUse, ...]


def limit_key(use: LimitUse) -> str:
    """How a limit is named in ``binding_limits``: ``kind|where|period`` (period may be empty)."""
    return f"{use.limit}|{use.where}|{use.period}"


def _money(instance: Instance, value: float) -> str:
    """An amount as the reports write it: whole units, separators, the currency if set."""
    return money_amount(value, instance.money.currency)


def _fte(value: float) -> str:
    """FTE (or FTE-periods) as a table's FTE column writes it: the number rule's
    :data:`~rebalance.numbers.TABLE_DIGITS` decimals, a whole 1 as 1.000 too (FTE columns
    hold decimals), so a reason reads as the coverage row beside it (it had written 1.00)."""
    return number_text(value, decimals=True)


def _describe(use: LimitUse, instance: Instance) -> str:
    what = LIMIT_NAMES[use.limit]
    names = instance.period_names
    if use.limit == "time_to_hire":
        first = int(use.cap)
        return (f"time to hire of {use.where} (no hire starts before {names[first]})"
                if first < len(names) else
                f"time to hire of {use.where} (no hire can start within the horizon)")
    if use.limit in ("hiring_budget", "moves_budget"):
        return (f"{what} {use.where} ({_money(instance, use.used)} of "
                f"{_money(instance, use.cap)} spent)")
    when = f" in {use.period}" if use.period else ""
    if use.limit == "away_share":
        # In whole people and the share they come from: "7 away of 7.950 allowed" had
        # read as fractional people to a practitioner.
        share = instance.policy.max_away_share
        present = round(use.cap / share) if share > 0 else 0
        return (f"{what} at {use.where}{when} ({number_text(use.used)} away, the most "
                f"allowed: {share_of(share)} of {present} present)")
    return f"{what} at {use.where}{when} ({number_text(use.used)} of {number_text(use.cap)} used)"


def _periods(n: int) -> str:
    return "period" if n == 1 else "periods"


def _span(names: tuple[str, ...], t1: int, t2: int) -> str:
    return f"in {names[t1]}" if t1 == t2 else f"from {names[t1]} to {names[t2]}"


def _gap_words(skill: str, office: str, names: tuple[str, ...], t1: int, t2: int,
               gap_periods: list[int]) -> str:
    """Whether ``office``'s own staff and hires leave a ``skill`` gap in each period of a
    detail run ``t1``..``t2`` (``gap_periods``: those that do), said for the periods it is
    true of: a run of two had been said to meet a gap in both where its second period was
    covered already (a reading of the demo's reasons)."""
    within = [t for t in range(t1, t2 + 1) if t in gap_periods]
    claim = (f"{skill} demand at {office} exceeds what {office}'s own staff and hires cover "
             "(people detailed in left out)")
    if len(within) == t2 - t1 + 1:
        return f"{claim} {_span(names, t1, t2)}"
    if within:
        covered = [names[t] for t in range(t1, t2 + 1) if t not in within]
        return (f"{claim} in {', '.join(names[t] for t in within)} (not in "
                f"{', '.join(covered)}, when they cover it)")
    return (f"{skill} demand at {office} is within what {office}'s own staff and hires cover "
            f"{_span(names, t1, t2)}")


def _move_words(instance: Instance, a: str, b: str, skill: str, need: int,
                left: list[int], cost: float, seats_full: list[int],
                share_full: list[int], *, can_detail: bool = True,
                refilled: tuple[int, int] = (0, 0), both_ways: str = "") -> str:
    """Why a person is reassigned from ``a`` to ``b`` for the periods ``left`` (present
    from the move on): the periods ``skill`` work at ``b`` needs them, ``a``'s full seats
    a move frees for good, an away share at its cap a detail would count against, and the
    move's cost against what details could do instead.  "needs them in 0 of the 2 periods
    ...: a lasting need" had been said of a move that freed a seat (a reading of a seats case).

    ``can_detail`` False: no detail is open to them, so none is priced (31 of a generated
    plan's 42 moves had been set against details their people may not go on).  ``refilled``:
    the plan's moves into ``a`` and out of it from the move's period on, where the first is
    not 0 (a seat freed "for good" had been claimed where counter-moves filled it again).
    ``both_ways``: words on moves the other way in the same period
    (:func:`rebalance.analysis.change_facts._both_ways`)."""
    names = instance.period_names
    n = len(left)
    start = names[left[0]] if left else ""
    if need:
        parts = [f"{skill} work at {b} needs them in {need} of the {n} {_periods(n)} from "
                 f"{start}" + (": a lasting need" if 2 * need >= n else "")]
    else:
        parts = [f"{skill} work at {b} is covered without them in the {n} {_periods(n)} from "
                 f"{start}"]
    def how_many(periods: list[int]) -> str:
        if len(periods) < n:
            return f"{len(periods)} of them"
        return "that one" if n == 1 else "both" if n == 2 else "all of them"

    into, out = refilled
    if seats_full and not into:
        parts.append(f"{a}'s seats are full in {how_many(seats_full)}, and a move frees a seat "
                     "there for good")
    elif seats_full:
        moved = (f"the plan moves {into} {'person' if into == 1 else 'people'} into {a} from "
                 f"{start} on and {out} out")
        parts.append(f"{a}'s seats are full in {how_many(seats_full)}, but {moved}, so "
                     + (f"moves free {out - into} of its seats on balance" if out > into
                        else "every seat moves free there is taken again"))
    m = instance.policy.max_consecutive_detail_periods
    move_text = _money(instance, cost)
    if not can_detail or m == 0:
        who = "them (not allowed to be detailed)" if not can_detail else "anyone (no details)"
        parts.append(f"a detail is not open to {who}, so only a move brings them to {b}; one "
                     f"move costs {move_text}")
        share_full = []
    elif share_full:
        parts.append(f"a detail would count against {a}'s away share, at its cap in "
                     f"{how_many(share_full)}; a move does not")
    per_period = instance.detail_cost_per_period(a, b)
    if can_detail and m is not None and 0 < m < n:
        # At most m of any m + 1 periods: on m, back 1, over the n periods left.
        most = n // (m + 1) * m + min(n % (m + 1), m)
        parts.append(f"one move ({move_text}) covers all {n} periods; details, at most {m} of "
                     f"any {m + 1} periods, could cover at most {most} of them "
                     f"({_money(instance, per_period * most)})")
    elif can_detail and m != 0:
        detail_text = _money(instance, per_period * n)
        # As written: "costs no less than" had been said of 20,000 against 10,000.
        than = ("as much as" if move_text == detail_text else
                "less than" if cost < per_period * n else "more than")
        parts.append(f"one move ({move_text}) costs {than} detailing them for all of it "
                     f"({detail_text})")
    if both_ways:
        parts.append(both_ways)
    elif not need and not (seats_full and out > into) and not share_full:
        parts.append("no gain visible from this move alone (review)")
    return "; ".join(parts)


def reasons(instance: Instance, plan: Plan, replanned_at: int | None = None) -> Reasons:
    """Reasons for ``plan``'s actions and shortfalls (see the module docstring).

    ``replanned_at``: the plan re-plans an earlier one from this period index, so what lies
    before it happened, hires already started are kept and runs under way go on.
    """
    ctx = _Context(instance, plan)
    names, ix, T = ctx.names, ctx.ix, len(instance.periods)
    rows: list[tuple[object, ...]] = []
    uses = limit_use(instance, plan)
    binding = [u for u in uses if u.binding]
    seats_full = {(u.where, u.period) for u in binding if u.limit == "seats"}
    share_full = {(u.where, u.period) for u in binding if u.limit == "away_share"}

    # -- hires: how long the gap they fill lasts ---------------------------------------------
    for h in hire_rows(plan):
        s = ix[h.start_period]
        out = [h.count * instance.hire_fte(h.skill, h.office, s, t) for t in range(T)]
        gaps = [ctx.gap_before_hires(h.office, h.skill, t) for t in range(T)]
        run = 0
        first = next((t for t in range(s, T) if gaps[t] > _EPS), None)
        if first is not None:
            for t in range(first, T):
                if gaps[t] <= _EPS:
                    break
                run += 1
        funding = "fills a funded vacancy" if h.funding == "vacancy" else "a new position"
        if first is None and replanned_at is not None and (
                s < replanned_at + instance.skill(h.skill).time_to_hire):
            text = (f"recruitment had begun before the re-plan from {names[replanned_at]}, "
                    "and a hire already started is not undone; demand there is now met "
                    f"without it ({_fte(sum(out[s:]))} FTE-periods of {h.skill} to spare)")
        elif first is None:
            text = (f"adds {_fte(sum(out[s:]))} FTE-periods of {h.skill} at {h.office} where "
                    "demand is met without it; kept by the solver at no gain (review)")
        else:
            mean_gap = sum(gaps[first:first + run]) / run
            lasting = ("to the end of the horizon" if first + run == T
                       else f"until {names[first + run - 1]}")
            # gap_before_hires counts the output of everyone working there, people detailed
            # in included, before hires: the words say so (the detail reason counts B's own
            # staff and hires, and had read as the same measure).
            text = (f"{h.skill} demand at {h.office} is above the output of the staff working "
                    f"there (people detailed in included, hires not) for {run} straight "
                    f"{_periods(run)} from {names[first]}, {lasting} (by {_fte(mean_gap)} FTE on "
                    f"average), so a hire ({funding})")
            if first > s:
                text += _early_start(instance, h.office, h.skill, s, first, binding,
                                     replanned_at)
        rows.append(("hire", f"{h.count} x {h.skill}", h.office, h.skill, h.start_period,
                     names[T - 1], float(h.count), text, ""))

    # -- details: runs of consecutive periods on one route per person -----------------------
    staff = {x.person: x for x in instance.staff}
    runs: list[tuple[str, str, str, int, int]] = []
    d = plan.details
    by_person: dict[str, list[tuple[int, str, str]]] = defaultdict(list)
    for p, per, a, b in zip(*(_texts(d[name]) for name in ("person", "period", "from_office",
                                                              "to_office")), strict=True):
        by_person[p].append((ix[per], a, b))
    # What each detail period costs, as details.csv says: a run with no work there is
    # priced in its reason.
    detail_cost = {(p, ix[per]): c for p, per, c in zip(
        _texts(d["person"]), _texts(d["period"]), _floats(d["cost"]), strict=True)}
    for p, items in sorted(by_person.items()):
        items.sort()
        start = items[0]
        last = items[0]
        for item in [*items[1:], (-9, "", "")]:
            if item[0] == last[0] + 1 and item[1:] == last[1:]:
                last = item
                continue
            runs.append((p, start[1], start[2], start[0], last[0]))
            start = last = item
    m = instance.policy.max_consecutive_detail_periods
    priority = {(dm.office, dm.skill, dm.period): dm.priority for dm in instance.demand}
    for p, a, b, t1, t2 in runs:
        out_by_skill: dict[str, float] = defaultdict(float)
        for t in range(t1, t2 + 1):
            for k, v in ctx.person_out.get((p, t), {}).items():
                out_by_skill[k] += v
        skill = max(out_by_skill, key=lambda k: out_by_skill[k]) if out_by_skill else ""
        n = t2 - t1 + 1
        idle = [t for t in range(t1, t2 + 1) if not ctx.person_out.get((p, t))]
        if replanned_at is not None and t2 < replanned_at:
            text = f"before the re-plan from {names[replanned_at]}: kept as it happened"
        elif not skill:
            text = f"detail to {b}"  # the idle clause below says there is no work there
            full = [names[t] for t in range(t1, t2 + 1) if (a, names[t]) in seats_full]
            if full:  # the seat it frees is its use (it had read "review")
                text += (f"; it meets no demand there, but {a}'s seats are full "
                         f"({', '.join(full)}), and a person away frees a seat there")
            elif not (replanned_at is not None and t1 < replanned_at <= t2):  # not under way
                cost = sum(detail_cost.get((p, t), 0.0) for t in range(t1, t2 + 1))
                text += (f"; it meets no demand there, and the plan would cost "
                         f"{money_amount(cost, instance.money.currency)} less without it "
                         "(review)")
        else:
            gap_periods = [t for t in range(T) if ctx.gap_without_visitors(b, skill, t) > _EPS]
            before = t1 - 1 in gap_periods
            after = t2 + 1 in gap_periods
            spare = all(ctx.short.get((a, skill, t), 0.0) <= _EPS for t in range(t1, t2 + 1))
            if not before and not after:
                # A gap, not a spike: it may come from the office's own people away as
                # much as from demand (a demand that barely moved had read as a spike).
                shape = f"a {n}-period gap" if n > 1 else "a one-period gap"
            elif m and n == m:
                # Only a run at the limit was cut short by it.
                shape = (f"part of a longer gap, and a person may be away on detail at "
                         f"most {m} of any {m + 1} periods")
            else:
                shape = "part of a longer gap"
            at_b = max(priority.get((b, skill, t), 1.0) for t in range(t1, t2 + 1))
            at_a = max(priority.get((a, skill, t), 1.0) for t in range(t1, t2 + 1))
            if spare:
                source = f"from {a}, which covers its own {skill} demand without them"
            else:
                short_too = f"from {a}, although {a} is short of {skill} itself then"
                full = [names[t] for t in range(t1, t2 + 1) if (a, names[t]) in seats_full]
                if at_b > at_a:
                    source = (f"{short_too}: the need at {b} ranks higher (priority "
                              f"{number_text(at_b)} there, {number_text(at_a)} at {a})")
                elif full:
                    source = (f"{short_too}: {a}'s seats are full ({', '.join(full)}), and a "
                              "person away frees a seat there")
                elif meets := _meets_more(instance, ctx, staff[p], a, b, skill, t1, t2,
                                          priority):
                    source = f"{short_too}: {meets}"
                else:
                    source = (f"{short_too}, at priority {number_text(at_a)} against "
                              f"{number_text(at_b)} at {b}: no gain in shortfall visible from this "
                              "detail alone (review)")
            gap_words = _gap_words(skill, b, names, t1, t2, gap_periods)
            if any(t1 <= t <= t2 for t in gap_periods):
                text = f"{gap_words}: {shape}, so a detail {source}"
            else:
                full = [names[t] for t in range(t1, t2 + 1) if (a, names[t]) in seats_full]
                text = f"{gap_words}, so the detail meets no gap there" + (
                    f"; {a}'s seats are full ({', '.join(full)}), and a person away frees a "
                    "seat there" if full else "; no gain visible from this detail alone "
                    "(review)")
        if idle and not (replanned_at is not None and t2 < replanned_at):
            under_way = replanned_at is not None and t1 < replanned_at <= t2
            text += (f"; idle in {', '.join(names[t] for t in idle)} (no work for them there "
                     "then" + (": a run under way goes on to its end)" if under_way else ")"))
        rows.append(("detail", p, b, skill, names[t1], names[t2], float(n), text, ""))

    # -- reassignments: a lasting gap at the new home -----------------------------------------
    r = plan.reassignments
    moves = [(p, ix[per], a, b) for p, per, a, b in zip(
        *(_texts(r[name]) for name in ("person", "period", "from_office", "to_office")),
        strict=True)]
    skills = []
    for p, t0, _, b in moves:
        left = [t for t in range(t0, T) if staff[p].is_present(t)]
        skill_gaps = {k: sum(1 for t in left if ctx.gap_without(p, b, k, t) > _EPS)
                      for k, _ in staff[p].skills}
        skills.append((max(skill_gaps, key=lambda k: skill_gaps[k]), skill_gaps, left))
    both_ways = _both_ways(instance, [(*move, k) for move, (k, _, _) in zip(
        moves, skills, strict=True)], staff)
    for (p, t0, a, b), cost, (skill, skill_gaps, left) in zip(moves, _floats(r["cost"]), skills,
                                                             strict=True):
        refilled = (sum(1 for _, t, _, y in moves if y == a and t >= t0),
                    sum(1 for _, t, x, _ in moves if x == a and t >= t0))
        text = _move_words(instance, a, b, skill, skill_gaps[skill], left, cost,
                           [t for t in left if (a, names[t]) in seats_full],
                           [t for t in left if (a, names[t]) in share_full],
                           can_detail=staff[p].can_detail, refilled=refilled,
                           both_ways=both_ways.get(p, ""))
        rows.append(("reassignment", p, b, skill, names[t0], names[T - 1], 1.0, text, ""))

    # -- shortfalls: the binding limits that could matter -------------------------------------
    limits = _Binding(instance, uses, replanned_at or 0)
    for (o, k, t), short in sorted(ctx.short.items(), key=lambda kv: (kv[0][2], kv[0])):
        if short <= _EPS:
            continue
        cited = limits.relevant(o, k, t)
        if cited:
            text = (f"{_fte(short)} FTE short; held back by " +
                    "; ".join(limits.describe(u, o, k, t) for u in cited))
        else:
            text = (f"{_fte(short)} FTE short; no binding limit found for it (the gap may be "
                    "below what one more whole head adds after ramp-up and attrition, or the "
                    f"people with {k} who could cover it cover larger needs elsewhere)")
        rows.append(("shortfall", f"{k} at {o}", o, k, names[t], names[t], short, text,
                     ";".join(limit_key(u) for u in cited)))
    return Reasons(pd.DataFrame(rows, columns=list(REASON_COLUMNS)), uses)


def _early_start(instance: Instance, office: str, skill: str, s: int, first: int,
                 binding: list[LimitUse], replanned_at: int | None) -> str:
    """Why a hire starts in period ``s``, before the gap it fills opens in ``first``: the
    reason had counted the gap from ``first`` without saying the start came earlier."""
    names = instance.period_names
    opens = f"the gap opens in {names[first]}"
    if replanned_at is not None and s < replanned_at + instance.skill(skill).time_to_hire:
        return (f"; it starts in {names[s]}, before {opens}, as recruitment had begun before "
                f"the re-plan from {names[replanned_at]}")
    # A ramp-up (skills.csv) makes a hire's first periods less productive: starting early
    # puts them before the gap, where they are not needed.
    ramp = instance.skill(skill).ramp
    early = first - s
    on_time = ramp[0] if ramp else 1.0
    then = ramp[early] if early < len(ramp) else 1.0
    if then > on_time:
        if early >= len(ramp):
            return f"; it starts in {names[s]} to be past its ramp-up when {opens}"
        return (f"; it starts in {names[s]} to be further into its ramp-up when {opens} "
                f"({share_of(then)} of full output there, against {share_of(on_time)} had it "
                "started then)")
    full = [u.period for u in binding if u.limit == "max_hires" and u.where == office
            and u.period in names[s + 1:first + 1]]
    if full:
        return (f"; it starts in {names[s]}, before {opens}, as the hiring slots at {office} "
                f"are full in {', '.join(full)}")
    return (f"; it starts in {names[s]}, before {opens}, for no gain visible here "
            "(review)")


def _meets_more(instance: Instance, ctx: _Context, who: Person, home: str, office: str,
                skill: str, t1: int, t2: int, priority: dict[tuple[str, str, int], float]
                ) -> str:
    """Where ``who`` meets more priority-weighted need of ``skill`` at ``office`` in periods
    ``t1`` to ``t2`` (what they give there, up to its gap without them) than they could at
    ``home`` (what they could give there, up to its shortfall), that in words; else "".  A
    detail from a short office had read "no gain visible (review)" where the destination
    would have been 1.3 FTE short without them and home was 0.07 short."""
    person = who.person
    there = here = 0.0
    there_w = here_w = 0.0
    for t in range(t1, t2 + 1):
        gives = ctx.person_out.get((person, t), {}).get(skill, 0.0)
        met = min(gives, max(0.0, ctx.gap_without(person, office, skill, t)))
        could = min(instance.available_fte(who, t) * who.proficiency(skill),
                    ctx.short.get((home, skill, t), 0.0))
        there, here = there + met, here + could
        there_w += met * priority.get((office, skill, t), 1.0)
        here_w += could * priority.get((home, skill, t), 1.0)
    if there_w <= here_w + _EPS:
        return ""
    return (f"they meet more need at {office} ({_fte(there)} FTE-periods of {skill} it would "
            f"lack without them) than they could at {home} ({_fte(here)} left short there), "
            "priorities counted")


class _Binding:
    """The binding limits, found by scope: each shortfall had read every binding limit and
    every person (a generated large plan's reasons took 8 s of the 10 s ``plan`` keeps for
    writing its files, most of it there; 0.6 s now)."""

    def __init__(self, instance: Instance, uses: Sequence[LimitUse],
                 earliest_start: int = 0) -> None:
        self.i = instance
        # A re-plan adds no start before the period it re-plans from.
        self.earliest_start = earliest_start
        self.names = instance.period_names
        binding = [u for u in uses if u.binding]
        # By scope, and an away share by period too (a large plan's shortfalls each met the
        # away shares of dozens of offices in every period); numbered in limit_use's order.
        # Every budget is here, bound or not: one with room for the cheapest hire or detail
        # anywhere may still hold back the hire or detail a shortfall needs.
        self.by_scope: dict[tuple[str, str], list[tuple[int, LimitUse]]] = defaultdict(list)
        for n, u in enumerate(uses):
            if u.binding or u.limit in BUDGET_LIMITS:
                self.by_scope[(u.where, u.period if u.limit == "away_share" else "")].append(
                    (n, u))
        self.words: dict[LimitUse, str] = {}
        # What a hire needs and may find short: what each capped year's hiring budget has
        # left, an office's slots in a period, an office's funded vacancies of a skill.
        self.budget_left = {u.where: u.cap - u.used for u in uses if u.limit == "hiring_budget"}
        self.moves_left = {u.where: u.cap - u.used for u in uses if u.limit == "moves_budget"}
        self.full_slots = {(u.where, u.period) for u in binding if u.limit == "max_hires"}
        self.no_vacancy = {u.where for u in binding if u.limit == "vacancies"}
        # By skill and home office: the last period a person who could be detailed to cover
        # the skill is present (people with no last period: the horizon's last).
        T = len(self.names)
        self.last_present: dict[str, dict[str, int]] = defaultdict(dict)
        for p in instance.staff:
            if not p.can_detail:
                continue
            last = T - 1 if p.last_period is None else p.last_period
            for skill, _ in p.skills:
                if p.proficiency(skill) > 0:
                    homes = self.last_present[skill]
                    homes[p.home_office] = max(homes.get(p.home_office, -1), last)

    def describe(self, use: LimitUse, office: str = "", skill: str = "", t: int = 0) -> str:
        """:func:`_describe`, once per limit (the demo's seats are cited by many shortfalls);
        a hiring budget cited for ``skill`` at ``office`` in period ``t`` adds what is left
        against the least a start it holds back costs that year.  "held back by hiring
        budget 2028 (1,322,000 of 1,400,000 spent)" had read as a budget at its cap, which
        the limits at their cap did not list: 78,000 left, less than an inspection start
        costs 2028 (a reading of the demo)."""
        if use not in self.words:
            self.words[use] = _describe(use, self.i)
        held = sorted((cost, s) for s, cost in self._start_costs(office, skill, t, use.where)
                      if cost > self.budget_left[use.where] + _EPS
                      ) if use.limit == "hiring_budget" and skill else []
        if not held:
            return self.words[use]
        cost, s = held[0]
        vacancy = " into a funded vacancy" if self._vacancy(office, skill) else ""
        return (f"{self.words[use][:-1]}: {_money(self.i, self.budget_left[use.where])} left, "
                f"less than the {_money(self.i, cost)} one {skill} hire{vacancy} starting in "
                f"{self.names[s]} would cost {use.where})")

    def _vacancy(self, office: str, skill: str) -> bool:
        """Whether a hire of ``skill`` at ``office`` may fill a funded vacancy still left."""
        return (self.i.vacancies.get((office, skill), 0) > 0
                and f"{skill} at {office}" not in self.no_vacancy)

    def _start_costs(self, office: str, skill: str, t: int,
                     year: str) -> list[tuple[int, float]]:
        """(start, what it costs ``year``) of each hire start that could cover period ``t``."""
        vacancy = self._vacancy(office, skill)
        return [(s, self.i.hire_cost_by_year(skill, s, new_position=not vacancy).get(year, 0.0))
                for s in range(self._first_start(skill), t + 1)]

    def budgets_holding(self, office: str, skill: str, t: int) -> set[str]:
        """The years whose hiring budget holds back a hire of ``skill`` at ``office`` covering
        period ``t``: a year holds a start back where it has less left than that start costs
        it (as a change's reason tests it; a funded vacancy left pays onboarding only, in its
        start year).  None where some start from the time to hire to ``t`` is held back by no
        year; else the years whose lifting would free the starts held back by fewest.  Every
        year a start could pay into had been cited (2027's for a 2028 shortfall that a 2028
        start could cover), and a year with room for the cheapest hire anywhere none (2028
        with 12,000 left, against the 51,000 an inspection hire there costs)."""
        instance = self.i
        vacancy = self._vacancy(office, skill)
        blocked = [{year for year, cost in instance.hire_cost_by_year(
            skill, s, new_position=not vacancy).items()
            if year in self.budget_left and cost > self.budget_left[year] + _EPS}
            for s in range(self._first_start(skill), t + 1)]
        if not blocked or not all(blocked):
            return set()
        fewest = min(len(years) for years in blocked)
        return {y for years in blocked if len(years) == fewest for y in years}

    def _first_start(self, skill: str) -> int:
        """The first period a hire of ``skill`` could start in: its time to hire, and in a
        re-plan not before the period re-planned from (slots full then and after had gone
        uncited for a start in the fixed past that was 'free' of them)."""
        return max(self.i.skill(skill).time_to_hire, self.earliest_start)

    def relevant(self, office: str, skill: str, t: int) -> list[LimitUse]:
        """The binding limits that could matter to a shortfall of ``skill`` at ``office`` in
        period ``t``, in the order :func:`limit_use` gives them."""
        instance, names = self.i, self.names
        T = len(names)
        first = self._first_start(skill)
        hire_possible = first <= t
        hire_years = self.budgets_holding(office, skill, t)
        hire_periods = {names[s] for s in range(first, t + 1)}
        # Slots hold a hire back only where every start that could cover ``t`` finds them
        # full: 2027-Q4's full slots had been cited for a 2028 shortfall a 2028 start covers.
        slots_all_full = all((office, p) in self.full_slots for p in hire_periods)
        # Seats full from ``t`` on hold back a detail then and every start that could cover
        # it (the latest holds a seat from ``t``); full only before ``t``, no start from ``t``
        # finds them so (seats full until 2028-Q2 had been cited for a 2028-Q4 shortfall).
        seat_periods = {names[s] for s in range(t, T)} if hire_possible else {names[t]}
        sources = {home for home, last in self.last_present.get(skill, {}).items()
                   if home != office and t <= last}
        year = instance.periods[t].year
        # Only limits scoped to one of these can be kept below; each limit has one scope.
        scopes = {(where, "") for where in (skill, office, year, f"{skill} at {office}",
                                            *hire_years)}
        scopes.update((home, names[t]) for home in sources)
        out = []
        for _, u in sorted((item for scope in scopes for item in self.by_scope.get(scope, ())),
                           key=lambda item: item[0]):
            if u.limit == "time_to_hire":
                keep = u.where == skill and u.period == names[t]
            elif u.limit == "hiring_budget":
                keep = u.where in hire_years
            elif u.limit == "max_hires":
                keep = slots_all_full and u.where == office and u.period in hire_periods
            elif u.limit == "seats":
                keep = u.where == office and u.period in seat_periods
            elif u.limit == "away_share":
                keep = u.where in sources and u.period == names[t]
            elif u.limit == "moves_budget":
                # Where what is left pays for no detail from any office that could send one
                # (2,000 left had paid for the cheapest detail anywhere, not one into here).
                keep = bool(sources) and u.where == year and self.moves_left[year] < min(
                    instance.detail_cost_per_period(home, office) for home in sources) - _EPS
            elif u.limit == "vacancies":
                keep = hire_possible and u.where == f"{skill} at {office}"
            else:
                keep = False
            if keep:
                out.append(u)
        return out
