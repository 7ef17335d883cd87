"""How a solve ended, in one set of plain words for every surface (console, page, workbook).

A planner who reads "plan found, not proven optimal" on the console should read the same on
the page and in the workbook; the raw status (``feasible_with_gap``) stays in summary.json.
"""

from __future__ import annotations

import re

from rebalance.numbers import gap_text

__all__ = ["STATUS_WORDS", "optimal_words", "outcome_words", "plain_status", "readable"]

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


def readable(column: str) -> str:
    """A table column's or measure's code as words: ``shortfall_fte_periods`` ->
    ``shortfall FTE-periods``."""
    text = str(column).replace("_", " ").strip()
    text = re.sub(r"\bfte periods\b", "FTE-periods", text, flags=re.I)
    return re.sub(r"\bfte\b", "FTE", text, flags=re.I)
