"""What late notice cost, in one line: a re-plan against the same data planned from the start
(``replan.csv``'s ``planned_ahead`` column, :mod:`rebalance.analysis.planned_ahead`).

The console (``rebalance.cli_analysis``) prints it and the page's re-plan section leads with
it, both from the table, so they say the same.  A difference no larger than the solves' gaps
allow is said to be within them, not claimed.
"""

from __future__ import annotations

import pandas as pd

from rebalance.analysis.planned_ahead import AHEAD_COLUMN, GAP_MEASURES
from rebalance.numbers import fte_total_text, gap_text, money_amount
from rebalance.report.analysis_words import GAP_SAID, WITHIN_GAPS, finite, shows
from rebalance.report.like_for_like_words import not_like_for_like

__all__ = ["GAP_ROWS_NOTE", "late_notice_line", "planned_ahead_heading"]

NOT_PROVEN = "(not proven: a solve's gap is unknown)"
# Under a re-plan's table with the plan made ahead: its last two rows, which a reader had no
# word for.
GAP_ROWS_NOTE = ("The shortfall gap and new money gap rows are each solve's stage gaps at "
                 "stop: how far its shortfall, and its new money (a re-plan's with the "
                 "disruption cost), may lie from the best the solver could prove; 0.00% is "
                 "proven best. The old plan was not solved again, so it has none.")


def _figure(table: pd.DataFrame, measure: str, column: str) -> float | None:
    rows = table.loc[table["measure"].astype(str) == measure, column].tolist()
    return finite(rows[:1])[0] if rows else None


def _caveat(difference: float, gaps: list[float | None], *figures: float) -> str:
    """" (within the solves' gaps)" where the gaps, times the larger figure compared, may
    account for ``difference`` (as a comparison's scenario lines judge it); a note where a
    gap is unknown; else nothing: the difference stands."""
    if any(g is None for g in gaps):
        return f" {NOT_PROVEN}"
    widest = max(g for g in gaps if g is not None)
    if widest > GAP_SAID and abs(difference) <= widest * max(abs(f) for f in figures):
        return f" {WITHIN_GAPS}"
    return ""


def late_notice_line(table: pd.DataFrame | None, at_period: str, first_period: str,
                     currency: str | None = None) -> str | None:
    """What reacting at ``at_period`` cost against planning for the same data from
    ``first_period``: more (or less) weighted shortfall and new money, each marked where it
    lies within the solves' gaps, with the stage gaps beside.  None where ``table`` has no
    :data:`AHEAD_COLUMN` (a re-plan without that comparison)."""
    if table is None or AHEAD_COLUMN not in table.columns or "measure" not in table.columns:
        return None
    new_w, ahead_w = (_figure(table, "weighted_shortfall", c) for c in ("new_plan", AHEAD_COLUMN))
    new_m, ahead_m = (_figure(table, "total_cost", c) for c in ("new_plan", AHEAD_COLUMN))
    if new_w is None or new_m is None:
        return None
    if ahead_w is None or ahead_m is None:
        return (f"Late notice: no plan was made for the same data from {first_period} within "
                f"its share of the time limit, so what reacting in {at_period} cost is not "
                "known.")
    disruption = _figure(table, "disruption_cost", "new_plan") or 0.0
    gaps = {(m, c): _figure(table, m, c) for m in GAP_MEASURES
            for c in ("new_plan", AHEAD_COLUMN)}

    more_w = new_w - ahead_w
    text_w = fte_total_text(abs(more_w))
    if not shows(text_w):
        shortfall = "leaves the same weighted shortfall"
    else:
        shortfall = (f"leaves {text_w} {'more' if more_w > 0 else 'fewer'} weighted "
                     "FTE-periods short" + _caveat(
                         more_w, [gaps["shortfall_gap", "new_plan"],
                                  gaps["shortfall_gap", AHEAD_COLUMN]], new_w, ahead_w))
    more_m = new_m - ahead_m
    text_m = money_amount(abs(more_m), currency)
    if not shows(text_m):
        money = "costs the same new money"
    else:
        # The re-plan's last stage weighed its new money with the disruption cost: its gap is
        # of that sum.
        money = (f"costs {text_m} {'more' if more_m > 0 else 'less'} new money" + _caveat(
            more_m, [gaps["new_money_gap", "new_plan"], gaps["new_money_gap", AHEAD_COLUMN]],
            new_m + disruption, ahead_m))

    def pair(measure: str) -> str:
        texts = [("unknown" if g is None else gap_text(g))
                 for g in (gaps[measure, "new_plan"], gaps[measure, AHEAD_COLUMN])]
        return f"{texts[0]} and {texts[1]}"

    stages = (f"stage gaps, re-plan and planned ahead: shortfall {pair('shortfall_gap')}, "
              f"new money {pair('new_money_gap')}")
    unlike = not_like_for_like(more_w if shows(text_w) else None,
                               more_m if shows(text_m) else None, either_way=True)
    # "compared with", not "than": "leaves the same weighted shortfall ... than" had read.
    return (f"Late notice: reacting in {at_period} {shortfall} and {money} compared with "
            f"planning for it from {first_period} ({stages}).{unlike}")


def planned_ahead_heading(for_replan_at: str, scenario: str | None, first_period: str) -> str:
    """What a re-plan's ``planned_ahead/`` folder holds, as its page and workbook head it: a
    scenario's plan heading alone ("Scenario surge") had not said it was made ahead for a
    re-plan."""
    data = f"scenario {scenario}" if scenario else "the instance's own data"
    return (f"Planned ahead: {data} planned from {first_period}, for the re-plan at "
            f"{for_replan_at}")
