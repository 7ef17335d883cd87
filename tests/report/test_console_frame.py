"""Result tables on the console read as a planner expects, not as pandas prints them."""

from __future__ import annotations

import math

import pandas as pd

from rebalance.report.console import format_frame


def test_gaps_money_counts_flags_and_missing_values_read_plainly() -> None:
    # A practitioner's reading of compare, frontier and marginal: "True", "NaN", "2465500.0",
    # a gap as 0.026161 beside percentages elsewhere.
    frame = pd.DataFrame({"scenario": ["base", "surge"], "verified": [True, False],
                          "gap": [0.026161, math.nan], "weighted_shortfall": [165.945102, 0.5],
                          "total_cost": [2465500.0, 2442000.4], "hires": [24, 25],
                          "step": [10.0, 0.05]})
    text = format_frame(frame)
    assert "2.62%" in text and "2,465,500" in text and "2,442,000" in text
    assert "165.95" in text and "yes" in text and "no" in text
    assert "NaN" not in text and "True" not in text and "2465500.0" not in text
    lines = text.splitlines()
    assert lines[0].split() == list(frame.columns) and len(lines) == 4
    assert lines[3].split()[2] == "-"  # the missing gap
    assert lines[2].split()[-1] == "10" and lines[3].split()[-1] == "0.05"
