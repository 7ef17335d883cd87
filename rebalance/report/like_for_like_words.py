"""When two plans' new money may be set side by side: only at the same shortfall.

Shortfall is weighed first (the lexicographic objective), so new money saved at more shortfall
is no saving of one plan over the other: the demo's re-plan had cost less for more left short,
and a comparison's scenario 166,500 less with 22.8 more FTE-periods short.  The late-notice
line (:mod:`rebalance.report.late_notice_words`) and a comparison's scenario lines
(:func:`rebalance.report.analysis_words.scenario_lines`) say it in the same words.
"""

from __future__ import annotations

__all__ = ["NOT_LIKE_FOR_LIKE", "not_like_for_like"]

NOT_LIKE_FOR_LIKE = ("The two leave different shortfall, so their new money is not like for "
                     "like: shortfall is weighed first.")


def not_like_for_like(more_shortfall: float | None, more_money: float | None, *,
                      either_way: bool = False, before: str = " ") -> str:
    """``before`` and :data:`NOT_LIKE_FOR_LIKE` where two plans leave different shortfall and
    differ in new money, else "".  Each difference is None where it reads as none as written
    (0.0); with ``either_way`` any two differences count, else only new money moving the
    other way from shortfall (less money for more short, or more for less)."""
    if not more_shortfall or not more_money:
        return ""
    if either_way or (more_shortfall > 0) != (more_money > 0):
        return before + NOT_LIKE_FOR_LIKE
    return ""
