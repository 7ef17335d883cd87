"""Analysis pages warn when the solves they compare stopped short of proof."""

from __future__ import annotations

import pandas as pd

from rebalance.report.analysis_view import _gap_note


def test_a_comparison_of_unproven_solves_says_differences_may_be_the_searchs() -> None:
    # A practitioner's reading of the demo's comparison: a surge scenario cost less than
    # the base, both stopped at gaps of 2.4-4.1%, and the page did not say so.
    frame = pd.DataFrame({"scenario": ["base", "surge"], "gap": [0.026, 0.041],
                          "total_cost": [2_465_500.0, 2_442_000.0]})
    note = _gap_note(frame)
    assert "4.10%" in note and "--time-limit" in note  # a gap as every surface writes one


def test_proven_solves_need_no_warning() -> None:
    assert _gap_note(pd.DataFrame({"scenario": ["base"], "gap": [0.0]})) == ""
    assert _gap_note(pd.DataFrame({"scenario": ["base"], "cost": [1.0]})) == ""
