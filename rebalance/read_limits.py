"""What the instance readers accept: each table's columns, what a row is read as where an
optional column is not given, and the bounds of numbers beyond which a plan cannot be made;
and whether an office's seats, a limit the input sets, can be kept at all.

Bounds past which the solvers fail: a demand of 1e308 FTE had passed ``check`` and made
``plan`` end in an internal error (OverflowError), 1e20 FTE in a solver failure, and an
hours_per_fte of 1e-300 turned modest hours into such a demand.
"""

from __future__ import annotations

from collections.abc import Mapping

from rebalance.instance import Instance, SeatCount, SeatWindow
from rebalance.problems import Problem
from rebalance.tables import MAX_NUMBER, RawTable, TableRows

__all__ = [
    "COLUMNS",
    "COLUMN_ASSUMED",
    "HOURS_PER_FTE_MAX",
    "HOURS_PER_FTE_MIN",
    "MAX_DEMAND_FTE",
    "MAX_DEMAND_HOURS",
    "MAX_NUMBER",
    "MAX_TIME_LIMIT_SECONDS",
    "seats_too_few",
    "table_rows",
]

COLUMNS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    # table: (required columns, optional columns)
    "offices": (("office", "location"), ("seats", "max_hires_per_period")),
    "skills": (("skill", "salary_per_period", "onboarding_cost", "time_to_hire"), ("ramp",)),
    "staff": (
        ("person", "home_office", "fte", "skills"),
        ("can_detail", "can_relocate", "last_period"),
    ),
    "demand": (("office", "skill", "period"), ("fte", "hours", "priority")),
    "move_costs": (
        ("from_location", "to_location"),
        ("detail_cost_per_period", "relocation_cost"),
    ),
    "vacancies": (("office", "skill", "count"), ()),
    "attrition": (("skill", "annual_rate"), ("office",)),
    "budget": (("year",), ("hiring", "moves")),
}

# What every row is read as where an optional column is not given (docs/instance-format.md,
# each table's "meaning"): said where a misspelt column (``seat``) leaves it so.
COLUMN_ASSUMED: dict[str, dict[str, str]] = {
    "offices": {"seats": "every office's seats are unlimited",
                "max_hires_per_period": "every office may start any number of hires a "
                                        "period"},
    "skills": {"ramp": "every new hire works at full productivity from the start"},
    "staff": {"can_detail": "everyone may be detailed (true)",
              "can_relocate": "nobody may be reassigned (false)",
              "last_period": "nobody leaves during the horizon"},
    # fte and hours are alternatives, so a table lacks one of them as a rule: neither is
    # here ("hours_basis", a column of notes beside fte, had been refused as "hours").
    "demand": {"priority": "every row's priority is 1"},
    "move_costs": {"detail_cost_per_period": "every detail costs the [move_costs] default of "
                                             "settings.toml",
                   "relocation_cost": "every reassignment costs the [move_costs] default of "
                                      "settings.toml"},
    "attrition": {"office": "every rate applies to its skill at every office"},
    "budget": {"hiring": "hiring is uncapped every year",
               "moves": "detail and relocation spending is uncapped every year"},
}

# A demand row's FTE (given, or converted from hours) and hours: far above any office's work
# (a whole agency is some thousands of FTE), and far below where solvers lose precision.
MAX_DEMAND_FTE = 1e6
MAX_DEMAND_HOURS = 1e9
# Hours one FTE works in a period: an hour a period at least (a period is a week or more),
# at most 10,000 (a year holds 8,760 hours).
HOURS_PER_FTE_MIN = 1.0
HOURS_PER_FTE_MAX = 10_000.0
# solver.time_limit_seconds: some 115 days, longer than any run is meant to take.
MAX_TIME_LIMIT_SECONDS = 1e7


def table_rows(name: str, table: RawTable, problems: list[Problem]) -> TableRows:
    """The rows of instance table ``name`` (offices, staff, ...), read with its columns; two
    column names alike but for case are one name given twice (``Seats,seats``: which would
    be read?), as :func:`~rebalance.tables.table_problems` says with ``ignore_case``."""
    assumed: Mapping[str, str] = COLUMN_ASSUMED.get(name, {})
    return TableRows(table, problems, COLUMNS[name], assumed, ignore_case=True)


def seats_too_few(instance: Instance, counts: list[SeatCount],
                   window: SeatWindow | None = None) -> str | None:
    """Where the people based at an office in each period (``counts``, one per period, from
    :meth:`Instance.seat_counts`) outnumber its seats, how many must be away, and whether
    enough may go (docs/model.md, seats: hires and details in only take seats), in each
    period or, held back by the consecutive-detail limit, over a ``window`` of them
    (:meth:`Instance.seat_windows`)."""
    names = instance.period_names
    over = [c for c in counts if c.must_go]
    if not over:
        return None
    office, seats = over[0].office, over[0].seats
    first, more = over[0], len(over) - 1
    seat_count = f"{seats} seat{'s' * (seats != 1)}"
    if more and all(c.based == first.based for c in over):
        said = (f"'{office}' has {first.based} people based there in {names[first.period]} "
                f"(and {more} more period{'s' * (more > 1)}) for {seat_count}: at least "
                f"{first.must_go} must be away each period (detailed out or reassigned)")
    else:
        later = (f", and more than {seats} in {more} more period{'s' * (more > 1)}"
                 if more else "")
        said = (f"'{office}' has {first.based} people based there in {names[first.period]} "
                f"for {seat_count}{later}: at least {first.must_go} must be away then "
                "(detailed out or reassigned)")
    short = next((c for c in over if c.too_few_may_go), None)
    if short is None and window is not None:
        return f"{said}; {window.words(names)}: no plan can keep its seats"
    if short is None:
        return said
    why = ", ".join(instance.away_limits(short.no_work_elsewhere > 0))
    go = f"only {short.may_go} may go" if short.may_go else "none may go"
    if short is first:
        return f"{said}, and {go} ({why}): no plan can keep its seats"
    return (f"{said}; in {names[short.period]} {short.must_go} must be away and {go} "
            f"({why}): no plan can keep its seats")
