"""Time-record quality control on the demo history with its planted defects."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from demand_helpers import DEMO_HISTORY, demo_names, load_make_history

from rebalance.demand.history import month_index, read_history
from rebalance.demand.quality import check_quality, robust_scores

# Which check must catch each kind of planted defect (instances/make_history.py).
EXPECTED_CHECK = {
    "decimal_slip": "hours_out_of_bounds",
    "negative_hours": "hours_out_of_bounds",
    "unknown_code": "unknown_activity",
    "duplicate": "duplicate",
    "misbooking": "anomaly",
    "partial_timesheet": "incomplete",
}


def test_robust_score_by_hand() -> None:
    # Median/MAD rule (Hampel; common practice): reference 10 12 11 13 50 -> median 12,
    # absolute deviations 2 0 1 1 38 -> MAD 1, scale 1.4826; x = 20 scores 8 / 1.4826.
    scores, median, scale = robust_scores(np.array([20.0]),
                                          np.array([[10.0, 12, 11, 13, 50]]), np.array([0.0]))
    assert median[0] == 12 and scale[0] == pytest.approx(1.4826)
    assert scores[0] == pytest.approx(8 / 1.4826)


@pytest.fixture(scope="module")
def generated_history(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, list]:
    """The demo history written by instances/make_history.py into a fresh folder."""
    out = tmp_path_factory.mktemp("history")
    planted = load_make_history().main(out)
    return out, planted


@pytest.fixture(scope="module")
def quality(generated_history: tuple[Path, list]):  # type: ignore[no-untyped-def]
    folder, planted = generated_history
    offices, skills = demo_names()
    return check_quality(read_history(folder, offices, skills)), planted


def test_each_planted_defect_is_caught(quality) -> None:  # type: ignore[no-untyped-def]
    result, planted = quality
    rec, sheets = result.records, result.timesheets
    assert len(planted) >= 10
    for defect in planted:
        month = month_index(defect.period)
        mine = rec[(rec["person"] == defect.person) & (rec["period"] == month)]
        sheet = sheets[(sheets["person"] == defect.person) & (sheets["period"] == month)]
        assert bool(sheet["excluded"].all()), defect
        if defect.kind == "missing_timesheet":
            assert mine.empty and not bool(sheet["complete"].iloc[0]), defect
            assert float(sheet["reported_hours"].iloc[0]) == 0.0
            continue
        if defect.activity:
            mine = mine[mine["activity"] == defect.activity]
        wanted = EXPECTED_CHECK[defect.kind]
        assert any(wanted in checks.split() for checks in mine["checks_failed"]), (defect, mine)
        assert bool(mine["excluded"].all()), defect


def test_no_clean_record_is_flagged(quality) -> None:  # type: ignore[no-untyped-def]
    result, planted = quality
    rec = result.records
    touched = {(d.person, month_index(d.period)) for d in planted}
    flagged = rec[rec["check"] != ""]
    stray = flagged[[(p, m) not in touched for p, m in zip(flagged["person"], flagged["period"],
                                                          strict=True)]]
    assert stray.empty, stray
    # Only defective timesheets are excluded, and every record is accounted for.
    excluded = rec[rec["excluded"]]
    assert {(p, m) for p, m in zip(excluded["person"], excluded["period"], strict=True)} <= touched
    summary = result.summary.set_index("check")
    assert int(summary["records"].sum()) == len(rec)
    assert int(summary.loc["kept", "records"]) == int((~rec["excluded"]).sum())
    assert result.verdict.startswith("good")


def test_committed_demo_history_is_what_the_script_writes(
        generated_history: tuple[Path, list]) -> None:
    folder, _ = generated_history
    for path in sorted(DEMO_HISTORY.iterdir()):
        assert (folder / path.name).read_bytes() == path.read_bytes(), path.name
