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


def test_the_console_carries_the_same_warning_in_plain_words(capsys) -> None:
    # A practitioner's reading: compare's console showed a surge scenario with less shortfall
    # than the base (the base's search had stopped 31% from its bound) with no warning; the
    # page had one.
    from rebalance.cli_analysis import _say_gaps
    from rebalance.report.analysis_words import gap_caution

    frame = pd.DataFrame({"scenario": ["base", "surge"], "gap": [0.3116, 0.0679]})
    caution = gap_caution(frame)
    assert "31.16%" in caution and "<" not in caution
    _say_gaps(frame)
    printed = " ".join(capsys.readouterr().out.split())
    assert printed == caution
    _say_gaps(pd.DataFrame({"scenario": ["base"], "gap": [0.0]}))
    assert capsys.readouterr().out == ""


def test_shortfall_is_held_to_its_own_stages_gap_not_the_cost_stages() -> None:
    # A practitioner's reading of a budget frontier: the note gave 5.59% (the cost stage's
    # gap) as the noise on shortfall, so a real gain of 2.8 of 165.8 FTE-periods read as
    # noise; the shortfall stage had stopped within about 0.5%.
    from rebalance.report.analysis_words import gap_caution

    frame = pd.DataFrame({"point": [1, 2], "gap": [0.0559, 0.0412],
                          "shortfall_gap": [0.0048, 0.0051],
                          "weighted_shortfall": [168.6, 165.8]})
    caution = gap_caution(frame)
    assert "up to 0.51% on shortfall" in caution and "5.59% on cost" in caution
    # Weighted mode has no shortfall stage: the one gap is said as before.
    weighted = frame.assign(shortfall_gap=None)
    assert "up to 5.59% (the gap column)" in gap_caution(weighted)


def test_the_note_names_the_shortfall_gap_column_as_the_table_heads_it() -> None:
    # A planner's reading: the comparison page and the frontier section said "(shortfall_gap
    # in the table's CSV file)" above a table that shows a "shortfall gap" column; only the
    # marginal table leaves that column out, to marginal_values.csv.
    frame = pd.DataFrame({"scenario": ["base", "surge"], "gap": [0.0233, 0.0362],
                          "shortfall_gap": [0.0048, 0.0100]})
    for key in ("scenarios", "frontier"):
        note = _gap_note(frame, key)
        assert "(the shortfall gap column)" in note and "CSV file" not in note, key
    assert "(<code>shortfall_gap</code> in marginal_values.csv)" in _gap_note(frame, "marginal")
