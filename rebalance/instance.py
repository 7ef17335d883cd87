"""Planning instance: frozen, validated data and the rules that interpret it.

An :class:`Instance` is built once, at the edge, by :func:`rebalance.readers.read_instance`,
and trusted from then on.  A scenario is a variant made with :func:`dataclasses.replace`,
never an in-place edit.  The small helpers here (cost look-ups, available FTE, ramp) are the
single statement of the instance's semantics; the model builder and the verifier both call
them so the two cannot drift apart on what a column means.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal, NoReturn

from rebalance.numbers import money_header, with_currency

# Largest priority of a demand row.  Far past any ranking of work a planner makes; beyond it
# the solvers' tolerances lose rows of priority 1 beside it (HiGHS, a held shortfall row
# scaled by a priority of 1e10, dropped the others and left them short while saying optimal).
MAX_PRIORITY = 1e6
ObjectiveMode = Literal["shortfall-first", "weighted"]
SolverName = Literal["highs", "cbc"]
# A rule of the data that rules an action out (Instance.move_ruled_out, hire_ruled_out).
RuledOut = Literal["left", "may_not_detail", "no_details", "may_not_relocate", "may_not_hire",
                   "before_time_to_hire", "no_demand", "no_vacancy"]


@dataclass(frozen=True)
class Period:
    """One planning period (a quarter by default)."""

    name: str
    year: str
    hours_per_fte: float


@dataclass(frozen=True)
class Office:
    name: str
    location: str
    seats: int | None = None
    max_hires_per_period: int | None = None


@dataclass(frozen=True)
class Skill:
    name: str
    salary_per_period: float
    onboarding_cost: float
    time_to_hire: int
    ramp: tuple[float, ...] = ()


@dataclass(frozen=True)
class Person:
    """A member of staff.  ``last_period`` is the index of the last period worked, if any."""

    person: str
    home_office: str
    fte: float
    skills: tuple[tuple[str, float], ...]
    can_detail: bool
    can_relocate: bool
    last_period: int | None = None

    def proficiency(self, skill: str) -> float:
        for name, value in self.skills:
            if name == skill:
                return value
        return 0.0

    def is_present(self, period: int) -> bool:
        return self.last_period is None or period <= self.last_period


@dataclass(frozen=True)
class Demand:
    office: str
    skill: str
    period: int
    fte: float
    priority: float = 1.0
    hours: float | None = None


@dataclass(frozen=True)
class MoveCost:
    """Costs for one direction between two locations; ``None`` falls back to the default."""

    detail_cost_per_period: float | None
    relocation_cost: float | None


@dataclass(frozen=True)
class Budget:
    """Caps on new money in one budget year; ``None`` means no cap."""

    year: str
    hiring: float | None
    moves: float | None


@dataclass(frozen=True)
class Policy:
    max_away_share: float = 1.0
    max_consecutive_detail_periods: int | None = None
    # Seats count people present, so early recall questions belong to re-planning (issue 5).


@dataclass(frozen=True)
class MoveCostDefaults:
    detail_cost_per_period: float = 0.0
    relocation_cost: float = 0.0
    same_location_detail_cost_per_period: float = 0.0
    same_location_relocation_cost: float = 0.0


@dataclass(frozen=True)
class Objective:
    mode: ObjectiveMode = "shortfall-first"
    # Cost of one priority-weighted FTE-period of shortfall, used in ``weighted`` mode only.
    shortfall_cost: float = 100_000.0
    # Relative slack on the stage-one optimum when stage two minimises cost.
    shortfall_tolerance: float = 1e-6


@dataclass(frozen=True)
class SolverSettings:
    name: SolverName = "highs"
    time_limit_seconds: float = 300.0
    relative_gap: float = 1e-4
    threads: int = 1
    seed: int = 0


@dataclass(frozen=True)
class Money:
    """What the instance's money is counted in.  ``currency`` is a short label (``EUR``,
    ``USD``, a symbol) that reports show beside amounts; ``None`` leaves them bare, as the
    figures carry no unit the input did not give."""

    currency: str | None = None

    def amount(self, text: str) -> str:
        """An amount already written as text, with its currency after it (``43,000 EUR``)."""
        return with_currency(text, self.currency)

    def header(self, words: str) -> str:
        """A column or axis name for money, with its currency (``cost (EUR)``)."""
        return money_header(words, self.currency)


@dataclass(frozen=True)
class SeatCount:
    """The people based at an office in one period against its seats (docs/model.md, seats:
    people at home and not away, people detailed in and hires started each take a seat)."""

    office: str
    period: int  # index
    seats: int
    based: int  # heads present whose home at the start is the office
    may_go: int  # the most of them any plan can have away then (Instance.most_away)
    # Of those who may be detailed (and not reassigned), how many have no work for their
    # skills at another office then: a detail goes only where there is (docs/model.md).
    no_work_elsewhere: int = 0

    @property
    def must_go(self) -> int:
        """Heads beyond the seats, who must be away (detailed out or reassigned)."""
        return max(0, self.based - self.seats)

    @property
    def too_few_may_go(self) -> bool:
        """No plan can keep the seats: fewer may go than must."""
        return self.may_go < self.must_go


@dataclass(frozen=True)
class SeatWindow:
    """Periods ``first`` to ``last`` (indices), as many as a person may be away on detail in
    a row plus one, in which an office's seats need more person-periods away than any plan
    can have: one that is on detail in each of them is back in one (the consecutive-detail
    limit), though any period alone may look possible (:class:`SeatCount`)."""

    office: str
    first: int
    last: int
    must_go: int  # person-periods beyond the seats over the window
    may_go: int  # the most person-periods away any plan can have then

    def words(self, period_names: Sequence[str]) -> str:
        """Why too few may be away, in the words of the input: 'in 2027-Q1 to 2027-Q3, 6
        person-periods must be away and at most 5 may be (max_consecutive_detail_periods =
        2: a person on detail is back 1 period in any 3)'."""
        m = self.last - self.first
        return (f"in {period_names[self.first]} to {period_names[self.last]}, {self.must_go} "
                f"person-periods must be away and at most {self.may_go} may be "
                f"(max_consecutive_detail_periods = {m}: a person on detail is back 1 period "
                f"in any {m + 1})")


class FrozenMap(dict[Any, Any]):
    """A read-only dict that still pickles (process pools and Dask ship instances around)."""

    def _read_only(self, *args: Any, **kwargs: Any) -> NoReturn:
        raise TypeError("instance data is read-only; use Instance.with_changes")

    __setitem__ = __delitem__ = clear = pop = popitem = setdefault = update = _read_only

    def __reduce__(self) -> tuple[Any, ...]:
        return (FrozenMap, (dict(self),))

    def __hash__(self) -> int:  # type: ignore[override]
        return hash(tuple(sorted(self.items(), key=repr)))


def _frozen(mapping: Mapping[Any, Any]) -> Mapping[Any, Any]:
    return FrozenMap(mapping)


@dataclass(frozen=True)
class Instance:
    """A validated planning instance.  Periods are referred to by 0-based index.  ``name`` is
    the folder's (or workbook's) name; ``title``, where settings give one (report.title),
    heads the reports instead of it."""

    name: str
    periods: tuple[Period, ...]
    periods_per_year: int
    offices: tuple[Office, ...]
    skills: tuple[Skill, ...]
    staff: tuple[Person, ...]
    demand: tuple[Demand, ...]
    move_costs: Mapping[tuple[str, str], MoveCost] = field(default_factory=dict)
    vacancies: Mapping[tuple[str, str], int] = field(default_factory=dict)
    # (skill, office) -> annual rate; office None is the skill's default row.
    attrition: Mapping[tuple[str, str | None], float] = field(default_factory=dict)
    budgets: tuple[Budget, ...] = ()
    policy: Policy = Policy()
    move_cost_defaults: MoveCostDefaults = MoveCostDefaults()
    objective: Objective = Objective()
    solver: SolverSettings = SolverSettings()
    money: Money = Money()
    warnings: tuple[str, ...] = ()
    title: str | None = None

    def __post_init__(self) -> None:
        for name in ("move_costs", "vacancies", "attrition"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))
        object.__setattr__(self, "_office", {o.name: o for o in self.offices})
        object.__setattr__(self, "_skill", {s.name: s for s in self.skills})
        object.__setattr__(self, "_budget", {b.year: b for b in self.budgets})
        # (office, skill) -> (period, fte) of each demand above 0 (a repeated row: the last
        # one's, as the model reads demand), for the hires a start could cover.
        fte = {(d.office, d.skill, d.period): d.fte for d in self.demand}
        wanted: dict[tuple[str, str], list[tuple[int, float]]] = {}
        for (o, k, t), x in fte.items():
            if x > 0:
                wanted.setdefault((o, k), []).append((t, x))
        object.__setattr__(self, "_wanted", wanted)

    # -- look-ups -------------------------------------------------------------------------
    @property
    def period_names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.periods)

    @property
    def heading(self) -> str:
        """What the reports are headed with: the title, else the folder's name."""
        return self.title or self.name

    @property
    def years(self) -> tuple[str, ...]:
        """Budget years in order of first appearance."""
        return tuple(dict.fromkeys(p.year for p in self.periods))

    def office(self, name: str) -> Office:
        return self._office[name]  # type: ignore[attr-defined]

    def skill(self, name: str) -> Skill:
        return self._skill[name]  # type: ignore[attr-defined]

    def budget(self, year: str) -> Budget | None:
        return self._budget.get(year)  # type: ignore[attr-defined]

    def budget_cap(self, year: str, cap_name: str) -> float | None:
        """The ``cap_name`` ("hiring" or "moves") cap of budget year ``year``; None where
        there is none (a blank cap, or a year with no row in budget.csv)."""
        if cap_name not in ("hiring", "moves"):  # not any attribute of a Budget
            raise ValueError(f"no budget cap named {cap_name!r}")
        budget = self.budget(year)
        cap: float | None = None if budget is None else getattr(budget, cap_name)
        return cap

    # -- semantics shared by the model and the verifier ------------------------------------
    def detail_cost_per_period(self, from_office: str, to_office: str) -> float:
        """Cost of one period of detail, by the locations of the home in force and destination."""
        a, b = self.office(from_office).location, self.office(to_office).location
        listed = self.move_costs.get((a, b))
        if listed is not None and listed.detail_cost_per_period is not None:
            return listed.detail_cost_per_period
        if a == b:
            return self.move_cost_defaults.same_location_detail_cost_per_period
        return self.move_cost_defaults.detail_cost_per_period

    def relocation_cost(self, from_office: str, to_office: str) -> float:
        a, b = self.office(from_office).location, self.office(to_office).location
        listed = self.move_costs.get((a, b))
        if listed is not None and listed.relocation_cost is not None:
            return listed.relocation_cost
        if a == b:
            return self.move_cost_defaults.same_location_relocation_cost
        return self.move_cost_defaults.relocation_cost

    def attrition_rate(self, skill: str, office: str) -> float:
        """Annual rate for a skill at an office, else the skill's office-less row, else 0."""
        rate = self.attrition.get((skill, office))
        if rate is None:
            rate = self.attrition.get((skill, None), 0.0)
        return rate

    def retention(self, annual_rate: float, periods_elapsed: int) -> float:
        """Expected share still on staff after ``periods_elapsed`` periods."""
        return float((1.0 - annual_rate) ** (periods_elapsed / self.periods_per_year))

    def available_fte(self, person: Person, period: int) -> float:
        """FTE a person brings to ``period`` after expected attrition (0 once they have left)."""
        if not person.is_present(period):
            return 0.0
        rate = self.attrition_rate(person.skills[0][0], person.home_office)
        return person.fte * self.retention(rate, period)

    def hire_fte(self, skill: str, office: str, start: int, period: int) -> float:
        """Productive FTE in ``period`` of one hire of ``skill`` at ``office`` from ``start``."""
        if period < start:
            return 0.0
        j = period - start  # 0 in the start period
        ramp = self.skill(skill).ramp
        productivity = ramp[j] if j < len(ramp) else 1.0
        return productivity * self.retention(self.attrition_rate(skill, office), j)

    def hire_cost_by_year(self, skill: str, start: int, count: float = 1.0, *,
                          new_position: bool) -> dict[str, float]:
        """What ``count`` hires of ``skill`` starting in period ``start`` cost the hiring
        budget, by budget year (docs/model.md, hiring_budget): onboarding in the start
        period's year, and for a new position the salary of every period from the start to
        the horizon's end, in that period's year; a vacancy hire pays onboarding only.  Years
        it pays nothing in are left out.  The model's rows, the re-plan's added hires, the
        binding test and the reasons call it; a plan's costs.csv (``plan.cost_table``, from
        the hires table's own onboarding cost) and the verifier state it apart, the verifier
        on purpose, and the verifier checks the two agree."""
        k = self.skill(skill)
        years = [p.year for p in self.periods[start:]]
        cost = {}
        for year in dict.fromkeys(years):
            amount = k.onboarding_cost if year == years[0] else 0.0
            if new_position:
                amount += k.salary_per_period * years.count(year)
            if amount:
                cost[year] = count * amount
        return cost

    # -- what the data rule out -------------------------------------------------------------
    # One statement of which rules leave an action no place, each a RuledOut code: the model
    # has no column for a hire they rule out (model._add_hire_columns), a re-plan refuses
    # such a past (replan_checks) and a change's reason says the data force it
    # (change_reasons).  Which to say first, and in what words, is each caller's.
    def move_ruled_out(self, person: Person, period: int,
                       what: Literal["detail", "reassignment"]) -> tuple[RuledOut, ...]:
        """Every rule of the data that rules out ``person``'s detail or reassignment in
        ``period``: they have left by then, may not go on detail (or no one may), may not be
        reassigned.  Empty where none does."""
        out: list[RuledOut] = []
        if not person.is_present(period):
            out.append("left")
        if what == "detail":
            if not person.can_detail:
                out.append("may_not_detail")
            if self.policy.max_consecutive_detail_periods == 0:
                out.append("no_details")
        elif not person.can_relocate:
            out.append("may_not_relocate")
        return tuple(out)

    def hire_ruled_out(self, office: str, skill: str, start: int, *,
                       new_position: bool) -> tuple[RuledOut, ...]:
        """Every rule of the data that leaves no hire of ``skill`` at ``office`` starting in
        period ``start``: the office may not hire (max_hires_per_period 0), the start is
        before the skill's time to hire, no demand from the start on that needs a whole hire
        (:meth:`hire_need`; a sliver of demand under 1e-9 hires needs none), or (a vacancy
        hire) no funded vacancy there.  Empty where none does."""
        return self._hire_rules(office, skill, start, self._hire_peak(office, skill, start),
                                new_position)

    def hire_need(self, office: str, skill: str, start: int) -> int:
        """The most hires of ``skill`` starting at ``office`` in period ``start`` that could
        help, the model's bound on such a start (the model bounds a vacancy hire by the
        vacancies too):
        the whole hires the largest later demand needs at what one such hire then gives
        (more than the peak needs is waste), within the office's max_hires_per_period; 0
        where :meth:`hire_ruled_out` rules a new position out, as the model has no column
        there."""
        peak = self._hire_peak(office, skill, start)
        if self._hire_rules(office, skill, start, peak, new_position=True):
            return 0
        cap = self.office(office).max_hires_per_period
        return peak if cap is None else min(peak, cap)

    def _hire_peak(self, office: str, skill: str, start: int) -> int:
        need = 0
        for t, fte in self._wanted.get((office, skill), ()):  # type: ignore[attr-defined]
            if t >= start and (gives := self.hire_fte(skill, office, start, t)) > 0:
                need = max(need, math.ceil(fte / gives - 1e-9))
        return need

    def _hire_rules(self, office: str, skill: str, start: int, peak: int,
                    new_position: bool) -> tuple[RuledOut, ...]:
        """:meth:`hire_ruled_out`, given the start's :meth:`_hire_peak` (no demand: 0)."""
        out: list[RuledOut] = []
        if self.office(office).max_hires_per_period == 0:
            out.append("may_not_hire")
        if start < self.skill(skill).time_to_hire:
            out.append("before_time_to_hire")
        if peak <= 0:
            out.append("no_demand")
        if not new_position and self.vacancies.get((office, skill), 0) <= 0:
            out.append("no_vacancy")
        return tuple(out)

    def most_away(self, office: str, period: int) -> int:
        """The most of the people present in ``period`` whose home at the start is ``office``
        (heads, not FTE: a seat holds a person) any plan can have away then: every
        relocatable one reassigned out, and detailable others up to the away share, in whole
        people, of those left (a reassignment out counts in no share; one in only adds a head).
        A detail goes only to an office with work for one of the person's skills then, as
        the model has them (docs/model.md, *Pruning*): "at most 2 may be away" had stood
        beside a conflict where the model could send none."""
        based = [p for p in self.staff if p.home_office == office and p.is_present(period)]
        reach = self._detail_reach()
        return self._most_away(len(based), sum(1 for p in based if p.can_relocate),
                               sum(1 for p in based if not p.can_relocate
                                   and _work_elsewhere(p, period, reach)))

    def _detail_reach(self) -> dict[tuple[str, int], tuple[str, ...]]:
        """(skill, period index) -> the offices with demand above zero for it then."""
        reach: dict[tuple[str, int], list[str]] = {}
        for d in self.demand:
            if d.fte > 0:
                reach.setdefault((d.skill, d.period), []).append(d.office)
        return {key: tuple(offices) for key, offices in reach.items()}

    def _most_away(self, based: int, relocatable: int, detailable: int) -> int:
        """:meth:`most_away` from the counts of the people based there: all, relocatable, and
        detailable but not relocatable."""
        if len(self.offices) < 2:
            return 0  # nowhere else to go
        if self.policy.max_consecutive_detail_periods == 0:  # no details at all
            return relocatable
        # The tolerance keeps 0.29 x 100 (28.999999999999996 in floats) at 29.
        share_cap = math.floor(self.policy.max_away_share * (based - relocatable) + 1e-9)
        return relocatable + min(detailable, share_cap)

    def away_limits(self, no_work_elsewhere: bool = False) -> tuple[str, ...]:
        """What caps :meth:`most_away`, in the words of the input: the staff flags and the
        policy settings that apply, or that there is no other office; ``no_work_elsewhere``:
        and that some who may be detailed have no work for their skills at another office."""
        if len(self.offices) < 2:
            return ("no other office",)
        details = self.policy.max_consecutive_detail_periods != 0
        return ("can_detail", "can_relocate",
                *([] if details else ["max_consecutive_detail_periods = 0"]),
                *(["max_away_share"] if self.policy.max_away_share < 1.0 else []),
                *(["no work for their skills at another office"]
                  if details and no_work_elsewhere else []))

    def seat_counts(self) -> tuple[SeatCount, ...]:
        """For every office with seats and every period, the people based there against
        its seats, office by office in the instance's order.  One pass over the staff (large:
        15,000 people, 60 offices, 12 periods; a count per office and period had been 10.8
        million steps)."""
        return self._seat_counts(self._detail_reach())

    def _seat_counts(self, reach: dict[tuple[str, int], tuple[str, ...]]
                     ) -> tuple[SeatCount, ...]:
        """:meth:`seat_counts` with the offices wanting each skill then already at hand."""
        T = len(self.periods)
        seated = {o.name: o.seats for o in self.offices if o.seats is not None}
        # Per office and period: [based, relocatable, detailable with work elsewhere and not
        # relocatable, detailable with none].
        counts = {name: [[0, 0, 0, 0] for _ in range(T)] for name in seated}
        for person in self.staff:
            rows = counts.get(person.home_office)
            if rows is None:
                continue
            for t in range(T if person.last_period is None else min(T, person.last_period + 1)):
                rows[t][0] += 1
                rows[t][1] += person.can_relocate
                if person.can_detail and not person.can_relocate:
                    rows[t][2 if _work_elsewhere(person, t, reach) else 3] += 1
        return tuple(SeatCount(name, t, seats, based,
                               self._most_away(based, relocatable, detailable), idle)
                     for name, seats in seated.items()
                     for t, (based, relocatable, detailable, idle) in enumerate(counts[name]))

    def seat_windows(self) -> tuple[SeatWindow, ...]:
        """Where the consecutive-detail limit alone keeps too few away over a run of periods
        (:class:`SeatWindow`), first per office.  Each period's count (:meth:`seat_counts`)
        may let enough go, yet a person detailed out must be back one period in every
        ``m + 1``: over such a window the most away is every relocatable person's periods
        present, and of the others the fewer of the periods' share caps and each person's
        ``m`` periods (at most, so this never says too few wrongly)."""
        m = self.policy.max_consecutive_detail_periods
        T = len(self.periods)
        if not m or m + 1 > T or len(self.offices) < 2:
            return ()
        reach = self._detail_reach()
        counts: dict[str, list[SeatCount]] = {}
        for c in self._seat_counts(reach):
            counts.setdefault(c.office, []).append(c)
        out = []
        for office, by_period in counts.items():
            based = [p for p in self.staff if p.home_office == office]
            for first in range(T - m):
                window = by_period[first:first + m + 1]
                must = sum(c.must_go for c in window)
                if not must:
                    continue
                relocatable = [sum(p.is_present(c.period) for p in based if p.can_relocate)
                               for c in window]
                # Detailed, not relocatable: each period's share cap, each person's m.
                by_share = sum(c.may_go - r for c, r in zip(window, relocatable, strict=True))
                by_person = sum(min(sum(p.is_present(c.period)
                                        and _work_elsewhere(p, c.period, reach)
                                        for c in window), m)
                                for p in based if not p.can_relocate)
                may = sum(relocatable) + min(by_share, by_person)
                if may < must:
                    out.append(SeatWindow(office, first, first + m, must, may))
                    break
        return tuple(out)

    def seat_shortages(self) -> tuple[SeatCount, ...]:
        """The :meth:`seat_counts` where the people based at an office outnumber its seats:
        some must be away (detailed out or reassigned) in every plan."""
        return tuple(c for c in self.seat_counts() if c.must_go > 0)

    def with_changes(self, **changes: object) -> Instance:
        """A copy with some fields replaced (a scenario is a variant of an instance)."""
        from dataclasses import replace

        return replace(self, **changes)  # type: ignore[arg-type]


def _work_elsewhere(person: Person, period: int,
                    reach: dict[tuple[str, int], tuple[str, ...]]) -> bool:
    """Whether ``person`` may be detailed in ``period`` to an office with work for one of
    their skills then (:meth:`Instance._detail_reach`)."""
    return person.can_detail and any(office != person.home_office for skill, _ in person.skills
                                     for office in reach.get((skill, period), ()))
