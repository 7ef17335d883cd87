"""What a planner defending a plan needs said beside its figures: which limits it runs up against,
and what its new positions cost every year once the horizon ends.

Both come from the plan's tables and the instance alone. Which limits are at their cap is
:func:`rebalance.analysis.limits.limit_use`'s answer (the one ``rebalance marginal`` and the
reasons stand on), so the summary names no limit those call slack but one: a moves budget with
money left for a detail within one location and for none between two, which stops every move
between cities (:func:`_local_only`). Each limit goes by its name there
(:data:`rebalance.analysis.limits.LIMIT_NAMES`); only the rule on details in a row is counted
here, as neither that module nor the verifier (whose check only flags an overrun, inside its
private checker) exposes how close a plan comes to it. The salaries and their warning are
:mod:`rebalance.planning`'s (summary.json carries the warning too), and the reports take them
from there. Last comes a line for offices short of staff that still send their own people out
on detail while their seats are full: the reasons explain it detail by detail, but the summary
had left leaders to ask. That line names no cap (it says what one does), so it stands apart,
under words of its own (:data:`SHORT_YET_AWAY_LEAD`): :data:`LIMITS_LEAD` speaks of the caps
alone.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass

from rebalance.analysis.limits import LIMIT_NAMES, LimitUse, limit_use
from rebalance.instance import Instance
from rebalance.numbers import counted, money_amount, money_text, number_text
from rebalance.plan import Plan
from rebalance.report.words import and_list
from rebalance.verify import unknown_names

__all__ = ["DETAILS_AT_LIMIT", "LIMITS_LEAD", "LIMITS_TITLE", "SHORT_YET_AWAY",
           "SHORT_YET_AWAY_LEAD", "LimitLine", "LimitsFound", "limits_at_cap",
           "period_spans"]

LIMITS_TITLE = "Limits the plan runs up against"
# What a limit at its cap means for the plan, and where to learn what one more would buy:
# two sentences, which the console writes on two lines.
LIMITS_LEAD = ("each is at its cap, so more of it could help.",
               "`rebalance marginal` says what one more step of each would buy")
# Names of people listed on a line before the rest are counted.
NAMES_LISTED = 3

# Kinds of limit in the order they are listed, each by the name `rebalance marginal` gives it
# (LIMIT_NAMES: "share away" here beside "away share" there had read as two limits);
# limit_use's other kind (time to hire) binds in every early period by definition, so it
# says nothing about this plan.  The rule on details in a row is no limit marginal relaxes:
# its line lists people away as much as the rule allows, in any periods of a window, so
# not always in a row.
DETAILS_AT_LIMIT = "details at the limit"
KIND_WORDS = (*((kind, LIMIT_NAMES[kind]) for kind in (
    "seats", "hiring_budget", "moves_budget", "max_hires", "vacancies", "away_share")),
    ("details_in_a_row", DETAILS_AT_LIMIT))
# Offices short of staff yet sending people out, listed after the limits: no cap of its own,
# but what full seats do to a short office, which a reader would otherwise take for a fault.
SHORT_YET_AWAY = "away while short"
# Its own lead: under LIMITS_LEAD ("each is at its cap, so more of it could help") it had read
# as one more cap.
SHORT_YET_AWAY_LEAD = "not a cap, but what full seats do to an office short of staff"
# A moves budget's year with money left for a detail within one location and none between two.
LOCAL_ONLY = "enough left only for a detail within one location"
# Money above a cap by less than this is the round-off of summed cost columns, not an overrun.
BUDGET_TOL = 0.5
# Shortfall below this (FTE) is rounding, as the console's shortfall by office takes it.
SHORT_FTE = 1e-6


@dataclass(frozen=True)
class LimitLine:
    """One kind of limit at its cap: ``words`` name it, ``text`` says where and when, and
    ``at_cap`` lists each (where, period) at its cap (period "" for a whole-horizon limit,
    a budget year's name for a budget).  ``total`` counts what ``text`` lists ("6 offices
    in 36 office-periods"), for a surface too narrow to list it all."""

    kind: str
    words: str
    text: str
    at_cap: tuple[tuple[str, str], ...]
    total: str = ""


def period_spans(indices: Sequence[int], names: Sequence[str]) -> str:
    """Periods (``indices`` into ``names``) compactly: "all 8 periods", "2027-Q3 to 2028-Q2
    (4 periods)", "2027-Q2", runs joined by commas."""
    ix = sorted(set(indices))
    if len(ix) == len(names) and len(names) > 1:
        return f"all {len(names)} periods"
    runs: list[list[int]] = []
    for t in ix:
        if runs and runs[-1][-1] == t - 1:
            runs[-1].append(t)
        else:
            runs.append([t])
    text = ", ".join(names[r[0]] if len(r) == 1 else f"{names[r[0]]} to {names[r[-1]]}"
                     for r in runs)
    return text if len(ix) == 1 else f"{text} ({len(ix)} periods)"


def _by_office(uses: Sequence[LimitUse], instance: Instance) -> str:
    """Offices with the periods each is at its cap; offices with the same periods share one
    entry, the most periods first."""
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    periods: dict[str, list[int]] = defaultdict(list)
    for use in uses:
        periods[use.where].append(ix[use.period])
    order = {o.name: i for i, o in enumerate(instance.offices)}
    groups: dict[tuple[int, ...], list[str]] = defaultdict(list)
    for office in sorted(periods, key=lambda o: order.get(o, len(order))):
        groups[tuple(sorted(periods[office]))].append(office)
    ranked = sorted(groups.items(), key=lambda g: -len(g[0]))
    return "; ".join(f"{and_list(offices)} {period_spans(list(key), names)}"
                     for key, offices in ranked)


def _office_total(uses: Sequence[LimitUse]) -> str:
    offices = len({use.where for use in uses})
    return (f"{counted(offices, 'office')} in "
            f"{counted(len({(u.where, u.period) for u in uses}), 'office-period')}")


def _over(use: LimitUse) -> bool:
    """Whether ``use`` spends more than its cap (a plan whose files were edited)."""
    return use.used - use.cap > BUDGET_TOL


def _budget_text(uses: Sequence[LimitUse], currency: str | None, action: str,
                 local: frozenset[str] = frozenset()) -> str:
    """Each year's spending against its cap and what is left (``local``: the moves budget's
    years with money left for a detail within one location and for none between two)."""
    used = [f"{u.where} {money_text(u.used)} of {money_amount(u.cap, currency)} spent"
            for u in uses]
    left = [_left_words(u, currency, action, local) for u in uses]
    if len(set(left)) == 1 and not any(_over(u) for u in uses):
        # "each": after two years' figures, the bracket had read as the last year's alone.
        each = "each with " if len(uses) > 1 else ""
        return "; ".join(used) + f" ({each}{left[0]})"
    # A year over its cap has nothing left, not "too little": each year says its own.
    return "; ".join(f"{text}: {words}" for text, words in zip(used, left, strict=True))


def _left_words(use: LimitUse, currency: str | None, action: str,
                local: frozenset[str]) -> str:
    if _over(use):
        return f"over the cap by {money_amount(use.used - use.cap, currency)}"
    if use.where in local:
        return LOCAL_ONLY
    return f"too little left for one more {action}"


def _budget_total(uses: Sequence[LimitUse], action: str,
                  local: frozenset[str] = frozenset()) -> str:
    """What a surface too narrow for :func:`_budget_text` says of the same years."""
    over = sum(1 for u in uses if _over(u))
    near = sum(1 for u in uses if not _over(u) and u.where in local)
    groups = [(over, "over the cap"),
              (len(uses) - over - near, f"with too little left for one more {action}"),
              (near, f"with {LOCAL_ONLY}")]
    said = [(n, words) for n, words in groups if n]
    # The first group counts budget years; the others follow it with a bare count.
    return ", ".join(f"{counted(n, 'budget year') if i == 0 else f'{n:,}'} {words}"
                     for i, (n, words) in enumerate(said))


def _local_only(instance: Instance, use: LimitUse) -> bool:
    """A moves budget with money left for a detail within one location but for none between
    two (the demo's 1,500 left paid for a detail inside a city and no other): marginal and
    the reasons count it as slack, yet it stops every move between cities."""
    between = [instance.detail_cost_per_period(a.name, b.name) for a in instance.offices
               for b in instance.offices if a.location != b.location]
    return (use.limit == "moves_budget" and not use.binding and use.used > 0
            and use.cap is not None and bool(between)
            and use.cap - use.used < min(between) - BUDGET_TOL)


def _details_in_a_row(instance: Instance, plan: Plan) -> tuple[str, ...]:
    """People whose details fill as many of some run of consecutive periods as the rule
    allows (policy ``max_consecutive_detail_periods`` m: at most m of any m + 1 periods,
    the windows the verifier checks), so no further detail fits there."""
    m = instance.policy.max_consecutive_detail_periods
    T = len(instance.periods)
    if not m or m >= T:
        return ()
    ix = {name: t for t, name in enumerate(instance.period_names)}
    away: dict[str, set[int]] = defaultdict(set)
    for person, period in zip(plan.details["person"].astype(str),
                              plan.details["period"].astype(str), strict=True):
        away[person].add(ix[period])
    return tuple(person for person, periods in away.items()
                 if any(len(periods & set(range(start, start + m + 1))) >= m
                        for start in range(0, T - m)))


def _short_yet_away(plan: Plan, seats: Sequence[LimitUse]) -> LimitLine | None:
    """Offices short of staff in some period (coverage) while people based there are
    detailed out (details' ``from_office``) and their seats are full (``seats``, the binding
    uses found above) in that same period, with those detail periods counted, most first."""
    full = {(use.where, use.period) for use in seats}
    cover = plan.coverage[plan.coverage["shortfall_fte"] > SHORT_FTE]
    short = set(zip(cover["office"].astype(str), cover["period"].astype(str), strict=True))
    counts: dict[str, int] = defaultdict(int)
    pairs: dict[tuple[str, str], None] = {}
    for office, period in zip(plan.details["from_office"].astype(str),
                              plan.details["period"].astype(str), strict=True):
        if (office, period) in full and (office, period) in short:
            counts[office] += 1
            pairs[(office, period)] = None
    if not counts:
        return None
    ranked = sorted(counts, key=lambda office: -counts[office])
    periods = counted(counts[ranked[0]], "person-period")
    most = f"{ranked[0]} ({periods})"
    why = "seats are full, and a person away frees a seat for a hire or a colleague"
    if len(ranked) == 1:
        text = (f"{ranked[0]} is short of staff yet sends people out on detail "
                f"({periods}): its {why}")
    else:  # "A (8 person-periods) and B (3) are ...": the unit said once
        offices = and_list([most, *(f"{office} ({counts[office]:,})" for office in ranked[1:])])
        text = f"{offices} are short of staff yet send people out on detail: their {why}"
    # What a surface too narrow for every office says: still why, and the office most out.
    total = (f"{most} and {counted(len(ranked) - 1, 'other office')} are short of staff "
             f"yet send people out on detail: their {why}")
    return LimitLine("short_yet_away", SHORT_YET_AWAY, text, tuple(pairs), total)


@dataclass(frozen=True)
class LimitsFound:
    """What :func:`limits_at_cap` found: ``caps``, the kinds of limit at their cap, which
    :data:`LIMITS_LEAD` introduces, and ``away_while_short``, the lines that explain a cap
    rather than name one (:data:`SHORT_YET_AWAY`), which :data:`SHORT_YET_AWAY_LEAD`
    introduces."""

    caps: tuple[LimitLine, ...] = ()
    away_while_short: tuple[LimitLine, ...] = ()

    @property
    def lines(self) -> tuple[LimitLine, ...]:
        """Every line, the caps first, as the surfaces list them."""
        return (*self.caps, *self.away_while_short)

    def __bool__(self) -> bool:
        return bool(self.caps or self.away_while_short)


def _vacancies_used(plan: Plan) -> float:
    """Hires the plan fills funded vacancies with, in all."""
    hires = plan.hires
    return float(hires.loc[hires["funding"].astype(str) == "vacancy", "count"].sum())


def limits_at_cap(instance: Instance, plan: Plan) -> LimitsFound:
    """Each kind of limit that ``plan`` has at its cap somewhere, in :data:`KIND_WORDS`'s
    order, and apart from them any offices short yet sending people out.  A limit counts
    where it binds (less is left than one more seat, hire, head away, vacancy or priced
    action) and the plan uses some of it: a cap of nothing (an office that may not hire, a
    share letting no one of a small office go) is a rule the plan was given, not one it ran
    up against.  Nothing for a plan naming what the instance lacks (a plan of another
    instance, which ``rebalance report`` still draws): its uses cannot be read."""
    if unknown_names(instance, plan):
        return LimitsFound()
    kinds: dict[str, list[LimitUse]] = defaultdict(list)
    local: set[str] = set()
    for use in limit_use(instance, plan):
        if use.binding and use.used > 0:
            kinds[use.limit].append(use)
        elif _local_only(instance, use):
            kinds[use.limit].append(use)
            local.add(use.where)
    currency = instance.money.currency
    out = []
    for kind, words in KIND_WORDS:
        uses = kinds.get(kind, [])
        if kind == "details_in_a_row":
            people = _details_in_a_row(instance, plan)
            if people:
                m = instance.policy.max_consecutive_detail_periods or 0  # set: some found
                listed = ", ".join(people[:NAMES_LISTED]) + (
                    f" and {len(people) - NAMES_LISTED} more" if len(people) > NAMES_LISTED
                    else "")
                text = (f"{len(people)} {'person' if len(people) == 1 else 'people'} away "
                        f"the most allowed ({m} of any {m + 1} periods): {listed}")
                out.append(LimitLine(kind, words, text, tuple((p, "") for p in people)))
            continue
        if not uses:
            continue
        if kind in ("seats", "max_hires", "away_share"):
            text, total = _by_office(uses, instance), _office_total(uses)
        elif kind in ("hiring_budget", "moves_budget"):
            action = "hire" if kind == "hiring_budget" else "detail"
            # Only the moves budget has years with money left for local details alone.
            near = frozenset(local) if kind == "moves_budget" else frozenset()
            text = _budget_text(uses, currency, action, near)
            total = _budget_total(uses, action, near)
        else:  # vacancies: "skill at office", funded over the whole horizon
            funded = sum(instance.vacancies.values())
            used = _vacancies_used(plan)
            # "all of them used" had read as every funded vacancy where some were left.
            whole = ("all of them" if used >= funded
                     else f"{number_text(used)} of {number_text(funded)} funded vacancies")
            listed = ", ".join(f"{u.where} ({number_text(u.cap)})" for u in uses)
            # "in all": the pairs listed need not add up to it (one used in part elsewhere).
            text = f"used in full: {listed}; {whole} used in all"
            total = (f"used in full at {counted(len(uses), 'skill-office pair')}; {whole} used "
                     "in all")
        out.append(LimitLine(kind, words, text, tuple((u.where, u.period) for u in uses),
                             total))
    away = _short_yet_away(plan, kinds.get("seats", []))
    return LimitsFound(tuple(out), (away,) if away else ())
