"""What a scenario assumed, in words: its name, description, demand changes and budget
changes, for the page and the workbook of a plan made under it.

``rebalance compare`` (each ``scenarios/<name>/`` folder) and ``rebalance replan --scenario``
store :func:`scenario_entry` in the folder's ``summary.json`` under
:data:`rebalance.report.inputs.SCENARIO_KEY`, so
``rebalance report FOLDER`` draws the same box from the folder alone.  A storm's page had
shown a 2027 hiring cap of 670,000 with no word that 150,000 of it was the scenario's.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from rebalance.analysis.scenario_files import (
    BudgetChange,
    DemandChange,
    DemandEffect,
    Scenario,
    demand_effects,
)
from rebalance.instance import Instance
from rebalance.numbers import fte_total_text, money_amount, plain_number
from rebalance.report.inputs import SCENARIO_KEY, ScenarioSummary
from rebalance.report.words import and_list

__all__ = ["SCENARIO_KEY", "budget_words", "demand_words", "figures_note", "scenario_entry",
           "scenario_rows"]
# Names listed in one selection before "and N more": a file may name every period.
NAMES_SHOWN = 6


def _listed(names: Sequence[str], every: str) -> str:
    """``a``, ``a and b``, ``a, b and c``; ``every`` where nothing was named."""
    shown = [*names[:NAMES_SHOWN]]
    if len(names) > NAMES_SHOWN:
        shown.append(f"{len(names) - NAMES_SHOWN} more")
    if not shown:
        return every
    return and_list(shown)


def _rows_words(count: int) -> str:
    return f"{count:,} row" + ("" if count == 1 else "s")


def demand_words(change: DemandChange, instance: Instance,
                 effect: DemandEffect | None = None) -> str:
    """One ``[[demand]]`` table in words: "demand for inspection at hollin-cross in 2027-Q4
    multiplied by 1.6", by what it did (``effect``, from :func:`demand_effects`; by default
    what ``change`` alone does to ``instance``).

    Rows are said to be added only where the demand it found had none: the harbour surge's
    page had said "a row of 4 FTE added where there was none" of rows demand.csv holds,
    which the surge raised."""
    if effect is None:
        effect = demand_effects(instance, Scenario("", "", (change,)))[0]
    skills = _listed(change.skills or (), "every skill")
    offices = _listed(change.offices or (), "every office")
    periods = _listed([instance.period_names[t] for t in change.periods or ()], "every period")
    where = f"demand for {skills} at {offices} in {periods}"
    if effect.added and not effect.changed:
        # Nothing there to multiply or raise: the rows are new, at add_fte each.
        return where + ": " + _added(change, len(effect.added))
    what = []
    if change.multiplier != 1.0:
        what.append(f"multiplied by {plain_number(change.multiplier)}")
    if change.add_fte:
        verb = "raised" if change.add_fte > 0 else "lowered"
        # add_fte is per demand row: one office and skill have a row a period.
        one = len(change.offices or ()) == 1 and len(change.skills or ()) == 1
        each = ("" if one and len(change.periods or ()) == 1 else " in each period" if one
                else " in each office, skill and period")
        what.append(f"{verb} by {plain_number(abs(change.add_fte))} FTE{each}")
    text = where + " " + (" and then ".join(what) or "unchanged")
    if effect.added:
        text += (f" where it has demand ({_rows_words(len(effect.changed))}); "
                 + _added(change, len(effect.added)))
    if effect.floored:  # apply_scenario takes demand to 0, not below
        text += f" ({_rows_words(len(effect.floored))} to 0, not below)"
    return text


def _added(change: DemandChange, count: int) -> str:
    return (f"{_rows_words(count)} of {plain_number(change.add_fte)} FTE added where there "
            f"{'was' if count == 1 else 'were'} none (priority "
            f"{plain_number(change.added_priority)})")


def budget_words(change: BudgetChange, currency: str | None) -> list[str]:
    """One ``[[budget]]`` table in words, a phrase per cap it changes: "hiring cap of 2027
    raised by 150,000 EUR"."""
    years = _listed(change.years or (), "every budget year")
    each = " each" if change.years is None or len(change.years) > 1 else ""
    out = []
    for kind, amount in (("hiring", change.hiring_add), ("moves", change.moves_add)):
        if amount:
            verb = "raised" if amount > 0 else "lowered"
            out.append(f"{kind} cap of {years}{each} {verb} by "
                       f"{money_amount(abs(amount), currency)}")
    return out


def _cap_lines(base: Instance, applied: Instance) -> list[str]:
    """Each cap the scenario moved, as the plan saw it against the instance's own."""
    currency = base.money.currency
    out = []
    for year in base.years:
        for kind in ("hiring", "moves"):
            before, after = base.budget_cap(year, kind), applied.budget_cap(year, kind)
            # As scenarios.csv's budget columns count a change (_budget_changes).
            if before is None or after is None or abs(after - before) <= 1e-9:
                continue
            out.append(f"{year} {kind} cap: {money_amount(after, currency)} under the "
                       f"scenario, {money_amount(before, currency)} in the instance's data")
    return out


def scenario_entry(scenario: Scenario, base: Instance, applied: Instance) -> dict[str, Any]:
    """``summary.json``'s :data:`SCENARIO_KEY`: the scenario's name, description, and its
    demand and budget changes in words (``applied``: ``base`` with the scenario applied,
    whose caps and demand the plan used).  The key "scenario" (the name alone) and
    "replan" keep their meaning: 'rebalance replan' reads the name from them."""
    # Each table by what it did to the demand as it found it: a table may raise rows an
    # earlier one added (apply_scenario applies them in turn).
    demand = [demand_words(c, base, effect) for c, effect in zip(
        scenario.demand, demand_effects(base, scenario), strict=True)]
    if scenario.demand:
        before = sum(d.fte for d in base.demand)
        after = sum(d.fte for d in applied.demand)
        # Per period summed over the horizon, as the scenarios table's demand_fte_periods.
        change = after - before
        sign = "+" if change >= 0 else "-"
        demand.append(f"in all, {fte_total_text(after)} FTE-periods of demand, against "
                      f"{fte_total_text(before)} in the instance's data ({sign}"
                      f"{fte_total_text(abs(change))})")
    budget = [words for c in scenario.budget for words in budget_words(
        c, base.money.currency)]
    budget += _cap_lines(base, applied)
    return {"name": scenario.name, "description": scenario.description,
            "demand": demand, "budget": budget}


def scenario_rows(scenario: ScenarioSummary) -> list[tuple[str, str]]:
    """The workbook summary's band for ``scenario``, what the plan's data assumed, as the
    page's box says it: (label, text) a row, the last a note with no text."""
    rows = [("description", scenario.description)] if scenario.description else []
    for label, said in (("demand", scenario.demand), ("budgets", scenario.budget)):
        rows += [(label, text) for text in said or ("as in the instance's data",)]
    return [*rows, (figures_note("here"), "")]


def figures_note(where: str) -> str:
    """Whose data the figures ``where`` (the page's "on this page", the workbook's "here")
    are: the scenario's, said under what it assumed."""
    return (f"Every figure {where} is of the plan made under these changes, not under the "
            "instance's own data.")
