"""Analysis tables are written whole, by rename, with the mode of any new file."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from rebalance.analysis.output import write_table


def test_a_table_gets_the_mode_of_any_new_file_and_leaves_no_temporary(tmp_path: Path) -> None:
    frame = pd.DataFrame({"limit": ["seats", "moves_budget"], "shortfall_reduction": [1.5, 0.0]})
    path = write_table(frame, tmp_path / "marginal_values.csv")
    (tmp_path / "plain.csv").write_text("")
    # A colleague reading the plan folder must be able to open it, as any file written there.
    assert path.stat().st_mode == (tmp_path / "plain.csv").stat().st_mode
    assert sorted(p.name for p in tmp_path.iterdir()) == ["marginal_values.csv", "plain.csv"]
    pd.testing.assert_frame_equal(pd.read_csv(path), frame)


def test_a_tables_numbers_carry_no_float_dust(tmp_path: Path) -> None:
    # A reading of a comparison: scenarios.csv gave the demand as 2021.6299999999994 (a sum of
    # rows that add to 2,021.63) and a gap as 0.02334077531966714.  Twelve significant digits
    # keep every real one (a money total of 123,456,789.5 too) and drop the dust.
    frame = pd.DataFrame({"demand_fte_periods": [2021.6299999999994],
                          "gap": [0.02334077531966714], "total_cost": [123_456_789.5],
                          "hires": [24]})
    path = write_table(frame, tmp_path / "t.csv")
    assert path.read_text().splitlines()[1] == "2021.63,0.0233407753197,123456789.5,24"
