"""The page's folded table of all reasons: past its 500 rows, every action kind is shown."""

from __future__ import annotations

import re
import shutil

import pandas as pd
from report_cases import TINY, page_text, tiny_plan_folder

from rebalance import read_instance
from rebalance.analysis.reasons import REASON_COLUMNS
from rebalance.report.analysis_view import _rows_by_kind
from rebalance.report.html import render_html
from rebalance.report.inputs import report_data_from_folder

# Made by hand, in reasons.csv's order (hires, detail runs, reassignments, shortfalls): a
# large plan's first 500 rows had all been hires, so the page showed no other kind.
KINDS = {"hire": 1500, "detail": 300, "reassignment": 40, "shortfall": 160}


def _big_reasons() -> pd.DataFrame:
    rows = [(kind, f"{kind} {i}", "A", "review", "2027-Q1", "2027-Q4", 1.0,
             f"why {kind} {i}", "") for kind, n in KINDS.items() for i in range(n)]
    return pd.DataFrame(rows, columns=list(REASON_COLUMNS))


def test_shares_by_kind_by_hand() -> None:
    # By hand, cap 500 over 2,000 rows: at least 500 // 20 = 25 each (100), the other 400
    # in proportion to the rows left, 1475 : 275 : 15 : 135 of 1,900, so 310.5, 57.9, 3.2
    # and 28.4, rounded down to 310, 57, 3, 28 (398); the two spare to the largest
    # remainders, detail's 0.9 and hire's 0.5 (the others 0.2 and 0.4).
    assert _rows_by_kind(KINDS, 500) == {"hire": 336, "detail": 83, "reassignment": 28,
                                         "shortfall": 53}
    # A kind smaller than its least share is shown whole; what fits is shown whole.
    assert _rows_by_kind({"hire": 990, "detail": 10}, 100) == {"hire": 90, "detail": 10}
    assert _rows_by_kind({"hire": 3, "shortfall": 2}, 500) == {"hire": 3, "shortfall": 2}


def test_past_the_cap_every_kind_is_shown_with_a_note_of_how_many(tmp_path) -> None:
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    _big_reasons().to_csv(folder / "reasons.csv", index=False)
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    start = page.index('<section id="reasons">')
    section = page[start:page.index("</section>", start)]
    full = re.search(r'data-table="reasons">(.*?)</table>', section, re.S)
    assert full is not None
    subjects = re.findall(r"<tr><td>[a-z]+</td><td>([a-z]+ \d+)</td>", full.group(1))
    assert len(subjects) == 500
    shown = {kind: [s for s in subjects if s.split()[0] == kind] for kind in KINDS}
    # The shares worked out by hand above, each kind's first rows, in the table's order.
    expected = {"hire": 336, "detail": 83, "reassignment": 28, "shortfall": 53}
    for kind, count in expected.items():
        assert shown[kind] == [f"{kind} {i}" for i in range(count)], kind
    assert subjects == [s for kind in KINDS for s in shown[kind]]
    words = page_text(section)
    assert "All 2,000 reasons, one row per action and shortfall" in words
    assert ("Showing 336 of 1,500 hires, 83 of 300 detail runs, 28 of 40 reassignments and "
            "53 of 160 shortfalls (each kind's first rows, in the table's order); reasons.csv "
            "and plan.xlsx have all 2,000.") in words
    assert "Showing the first 500" not in words


def test_the_cited_limits_note_does_not_call_every_cited_limit_binding() -> None:
    # A reviewer's reading of the demo's page: "Each binding limit the shortfalls cite" over
    # a 2028 hiring budget with 78,000 left, which the limits block rightly leaves out (a
    # cheaper hire still fits); the note now says what a cited budget year means.
    from rebalance.report.analysis_view import _reasons_rolled_up

    frame = pd.DataFrame([("shortfall", "review at B", "B", "review", "2027-Q3", "2027-Q3",
                           0.5, "short", "hiring_budget|2027|")], columns=list(REASON_COLUMNS))
    body = _reasons_rolled_up(frame, None)
    assert "Each binding limit" not in body and "may still have room for a cheaper one" in body
