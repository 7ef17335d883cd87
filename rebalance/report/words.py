"""How a solve ended, in one set of plain words for every surface (console, page, workbook),
and the few other notes every surface words alike.

A planner who reads "plan found, not proven optimal" on the console should read the same on
the page and in the workbook; the raw status (``feasible_with_gap``) stays in summary.json.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

from rebalance.instance import Instance
from rebalance.numbers import FTE_TOTAL_DIGITS, dust_free, gap_text

__all__ = ["ATTRITION_NOTE", "CODE_WORDS", "STATUS_WORDS", "and_list", "expects_attrition",
           "optimal_words", "outcome_words", "parts_decimals", "people_text", "plain_status",
           "readable", "total_text"]

# Beside the work table (the page's work and capacity section, the workbook's work sheet):
# work.csv's fte for a 1.0-FTE person reads 0.969, 0.938, ... (docs/model.md), and neither
# had said why.
ATTRITION_NOTE = ("Available FTE falls period by period with expected attrition, so a "
                  "person's fte in the work table (work.csv, the work sheet) shrinks over "
                  "the horizon.")


def expects_attrition(instance: Instance) -> bool:
    """Whether ``instance`` expects anyone to leave (some attrition rate above 0)."""
    return any(rate > 0 for rate in instance.attrition.values())

STATUS_WORDS = {
    "optimal": "optimal",
    "feasible_with_gap": "plan found, not proven optimal",
    "infeasible": "no plan: the hard limits conflict",
    "no_plan_in_time": "no plan within the time limit",
    "error": "solver error",
    "unknown": "unknown solver outcome",
    "approximate": "approximate (no plan)",
}


def plain_status(status: object) -> str:
    """A solver status (``feasible_with_gap`` or its :class:`~rebalance.solve.Status`) in
    plain words."""
    key = str(getattr(status, "value", status))
    return STATUS_WORDS.get(key, key.replace("_", " "))


def optimal_words(gap: float | None) -> str:
    """A run or stage proven optimal as asked: within the relative gap it was given, not
    exactly, so what is left is said."""
    return "optimal" + (f" within the gap asked ({gap_text(gap)} left)" if gap else "")


def outcome_words(status: object, gap: float | None) -> str:
    """How a run or stage ended, with the gap an optimal one has left."""
    if str(getattr(status, "value", status)) == "optimal":
        return optimal_words(gap)
    return plain_status(status)


# Codes whose words are not the code spelt out: total_cost is new money (onboarding,
# new-position salaries, details, relocations), and leaders had read "total cost" in the
# re-plan and compare tables as the whole staffing cost.  The CSV and JSON keep the code.
CODE_WORDS = {"total_cost": "new money"}


def readable(column: str) -> str:
    """A table column's or measure's code as words: ``shortfall_fte_periods`` ->
    ``shortfall FTE-periods``, ``total_cost`` -> ``new money`` (:data:`CODE_WORDS`)."""
    code = str(column).strip()
    if code in CODE_WORDS:
        return CODE_WORDS[code]
    text = code.replace("_", " ")
    text = re.sub(r"\bfte periods\b", "FTE-periods", text, flags=re.I)
    return re.sub(r"\bfte\b", "FTE", text, flags=re.I)


def people_text(count: int) -> str:
    """``1 person``, ``3 people`` (:func:`~rebalance.numbers.counted` adds an s)."""
    return f"{count:,} {'person' if count == 1 else 'people'}"


def and_list(words: Sequence[str]) -> str:
    """``a``, ``a and b``, ``a, b and c``: one or more words as a sentence lists them."""
    return words[0] if len(words) == 1 else f"{', '.join(words[:-1])} and {words[-1]}"


# Most decimals a total and its parts are shown with so that the shown parts add up.
MOST_PART_DIGITS = 3


def parts_decimals(parts: Sequence[float], digits: int = FTE_TOTAL_DIGITS) -> int:
    """The fewest decimals, from ``digits``, at which ``parts`` as shown add up to their sum
    as shown ("71.1 = 52.1 + 18.9" had read under a total of 52.130 + 18.934 = 71.064; at two
    decimals 52.13 + 18.93 = 71.06); at most :data:`MOST_PART_DIGITS`."""
    for d in range(digits, MOST_PART_DIGITS + 1):
        shown = [round(dust_free(p), d) for p in parts]
        if round(sum(shown), d) == round(dust_free(sum(parts)), d):
            return d
    return MOST_PART_DIGITS


def total_text(value: float, decimals: int = FTE_TOTAL_DIGITS) -> str:
    """FTE-periods as :func:`~rebalance.numbers.fte_total_text` writes them, with
    ``decimals`` (:func:`parts_decimals`) in place of its one."""
    return f"{dust_free(value) + 0.0:,.{decimals}f}"
