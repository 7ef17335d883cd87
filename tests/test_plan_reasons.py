"""`rebalance plan` writes reasons.csv with every plan, and its page and workbook show them.

A planner defending a plain plan could not see why a person was detailed: only the analysis
commands (compare, replan, marginal) wrote reasons.csv.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
from conftest import DATA, ROOT
from openpyxl import load_workbook

from rebalance.cli import EXIT_OK

# Rows as (action, subject, office, first_period, last_period), worked out by hand from each
# instance's data (tests/data/tiny/NOTE.md).
TINY = [
    # B's review gap of 1.0 in 2027-Q2 and Q3 (2.0 wanted, b1 gives 1.0): a1 on detail from A,
    # for two periods in a row, the most allowed.
    ("detail", "a1", "B", "2027-Q2", "2027-Q3"),
    # b1 leaves after Q3; B's 1.0 in Q4: a2 on detail (review 0.8) and one hire (half output
    # in its first period, ramp 0.5) for the 0.2 left.
    ("detail", "a2", "B", "2027-Q4", "2027-Q4"),
    ("hire", "1 x review", "B", "2027-Q4", "2027-Q4"),
]
# tiny with B's 2027-Q2 review demand raised from 2.0 to 3.0.  A hire starting in Q2 would cost
# 8,000 + 3 x 20,000 of the 40,000 hiring budget, so B gets a2 for good (review 0.8; one
# reassigned is not away, so A's away share, half of those present, still lets a1 go on detail
# in Q2) and the Q4 hire as in tiny; what is left short: B 3.0 - 2.8 in Q2 and 2.0 - 1.8 in Q3
# (priority 2), and A's 0.5 in Q2, a1 being away and a3 having no review.
SHORT = [
    ("detail", "a1", "B", "2027-Q2", "2027-Q2"),
    ("hire", "1 x review", "B", "2027-Q4", "2027-Q4"),
    ("reassignment", "a2", "B", "2027-Q1", "2027-Q4"),
    ("shortfall", "review at A", "A", "2027-Q2", "2027-Q2"),
    ("shortfall", "review at B", "B", "2027-Q2", "2027-Q2"),
    ("shortfall", "review at B", "B", "2027-Q3", "2027-Q3"),
]


def _instance(tmp_path: Path, raised: bool) -> Path:
    if not raised:
        return DATA / "tiny"
    folder = tmp_path / "tiny_short"
    shutil.copytree(DATA / "tiny", folder)
    demand = pd.read_csv(folder / "demand.csv", dtype=str, keep_default_na=False)
    row = (demand["office"] == "B") & (demand["period"] == "2027-Q2")
    demand.loc[row, "fte"] = "3.0"
    demand.to_csv(folder / "demand.csv", index=False)
    return folder


def _detail_runs(details: pd.DataFrame) -> int:
    """Runs of consecutive periods on one route per person, counted from details.csv
    (period names sort in time order in tiny)."""
    runs = 0
    for _, rows in details.sort_values(["person", "period"]).groupby("person"):
        last = None
        for period, route in zip(rows["period"], zip(rows["from_office"], rows["to_office"],
                                                     strict=True), strict=True):
            quarter = int(period[0:4]) * 4 + int(period[-1])
            if last is None or quarter != last[0] + 1 or route != last[1]:
                runs += 1
            last = (quarter, route)
    return runs


@pytest.mark.parametrize(("raised", "expected"), [(False, TINY), (True, SHORT)],
                         ids=["tiny", "tiny_short"])
def test_plan_writes_a_reason_for_every_action_and_shortfall(tmp_path, raised, expected):
    out = tmp_path / "plan"
    done = subprocess.run([sys.executable, "-m", "rebalance.cli", "plan",
                           str(_instance(tmp_path, raised)), "-o", str(out)],
                          capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert done.returncode == EXIT_OK, done.stderr
    table = pd.read_csv(out / "reasons.csv", keep_default_na=False)
    got = sorted(zip(table["action"], table["subject"], table["office"], table["first_period"],
                     table["last_period"], strict=True))
    assert got == expected
    # And against the plan's own tables: a row per hire group, detail run, reassignment and
    # coverage row short, each with its words.
    count = table["action"].value_counts()
    details = pd.read_csv(out / "details.csv")
    coverage = pd.read_csv(out / "coverage.csv")
    assert count.get("hire", 0) == len(pd.read_csv(out / "hires.csv"))
    assert count.get("detail", 0) == _detail_runs(details)
    assert table.loc[table["action"] == "detail", "amount"].sum() == len(details)
    assert count.get("reassignment", 0) == len(pd.read_csv(out / "reassignments.csv"))
    short = coverage[coverage["shortfall_fte"] > 1e-6]
    assert count.get("shortfall", 0) == len(short)
    assert abs(table.loc[table["action"] == "shortfall", "amount"].sum()
               - short["shortfall_fte"].sum()) < 1e-9
    assert (table["reason"].str.len() > 20).all()
    # The page's and the workbook's reasons (report.inputs reads reasons.csv from the folder).
    page = (out / "report.html").read_text(encoding="utf-8")
    assert 'href="#reasons"' in page and "Why each action" in page
    assert "reasons" in load_workbook(out / "plan.xlsx", read_only=True).sheetnames
