"""`rebalance demand` end to end on the demo history, and on broken history input."""

from __future__ import annotations

import contextlib
import csv
import io
import shutil
from pathlib import Path

import pandas as pd
import pytest
from demand_helpers import DEMO, DEMO_HISTORY

from rebalance.cli import EXIT_INVALID_INPUT, EXIT_OK, EXIT_USAGE, main
from rebalance.readers import read_instance

INSTANCE_FILES = ("settings.toml", "offices.csv", "skills.csv", "staff.csv", "budget.csv",
                  "move_costs.csv", "vacancies.csv", "attrition.csv")


def _instance_without_demand(folder: Path) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for name in INSTANCE_FILES:
        shutil.copy(DEMO / name, folder / name)
    return folder


@pytest.fixture(scope="module")
def demand_run(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = _instance_without_demand(tmp_path_factory.mktemp("instance") / "demo")
    console = io.StringIO()
    with contextlib.redirect_stdout(console):
        assert main(["demand", str(DEMO_HISTORY), "-o", str(out)]) == EXIT_OK
    (out.parent / "console.txt").write_text(console.getvalue())  # beside the instance
    return out


def test_counts_and_words_read_as_a_planner_reads_them(demand_run: Path) -> None:
    # A first-time planner's reading: "57 of 31359 records" beside "835,942.8 hours",
    # cases as 6354.0000, "(trail: ...)", "as good as it is" and two columns checks/check.
    console = (demand_run.parent / "console.txt").read_text()
    report = demand_run / "demand_report"
    with (DEMO_HISTORY / "time_records.csv").open(newline="") as handle:
        records = sum(1 for _ in csv.reader(handle)) - 1  # the demo's own rows, header aside
    assert records >= 1000  # else a separator would not show
    assert f" of {records:,} records excluded" in console
    assert f" of {records:,} records excluded" in (report / "qc_verdict.txt").read_text()
    kept = next(line for line in console.splitlines() if line.strip().startswith("kept"))
    kept_records = int(pd.read_csv(report / "qc_summary.csv").set_index("check")
                       .loc["kept", "records"])
    assert f"{kept_records:,} records" in kept, kept
    assert "(trace: demand_trace.csv)" in console and "trail" not in console
    assert "only as good as the forecast." in console and "as good as it is" not in console
    with (report / "effort_standards.csv").open(newline="") as handle:
        cases = [row["cases"] for row in csv.DictReader(handle)]
    assert cases and all(c.isdigit() for c in cases), cases[:5]
    flagged = pd.read_csv(report / "qc_flagged_records.csv", keep_default_na=False)
    assert "checks" not in flagged.columns
    # check: the first failed, as qc_summary.csv counts it; checks_failed: all of them.
    assert all(failed.split()[0] == first for first, failed
               in zip(flagged["check"], flagged["checks_failed"], strict=True))
    assert (flagged["checks_failed"].str.contains(" ")).any()  # the demo has such a record


@pytest.mark.parametrize("where", ["missing/deeper", "a_file/deeper"])
def test_an_output_folder_that_is_not_there_is_a_refused_output(
        where: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # A planner's reading: -o /path/that/does/not/exist/deeper read "HISTORY: 1 problem in the
    # input", exit 3; a refused output folder is exit 2 (README, exit codes).
    (tmp_path / "a_file").write_text("")
    out = tmp_path / where
    assert main(["demand", str(DEMO_HISTORY), "-o", str(out)]) == EXIT_USAGE
    err = capsys.readouterr().err
    assert err.startswith(f"{out}: instance folder not found; expected the instance folder"), err
    assert "in the input" not in err and str(DEMO_HISTORY) not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a_file"]


def test_demand_csv_is_a_valid_instance_table(demand_run: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    assert main(["check", str(demand_run)]) == EXIT_OK
    instance = read_instance(demand_run)
    assert len(instance.demand) > 0
    periods = instance.period_names
    assert periods[0] == "2027-Q1" and len(periods) == 8
    total = sum(d.fte for d in instance.demand)
    assert 1500 < total < 2600  # roughly the demo's designed level (about 2,000 FTE-periods)
    assert {d.priority for d in instance.demand if d.skill == "legal_review"} == {2.0}


def test_every_fte_is_traceable(demand_run: Path) -> None:
    instance = read_instance(demand_run)
    trace = pd.read_csv(demand_run / "demand_trace.csv")
    standards = pd.read_csv(demand_run / "demand_report" / "effort_standards.csv")
    cases = trace[trace["kind"] == "case"]
    # Each case row: volume = forecast x adjustment and hours = volume x hours per case, with
    # hours per case exactly the effort standard of that office, case type and skill.
    assert (cases["volume"] - cases["forecast_volume"] * cases["adjustment_factor"]
            ).abs().max() < 1e-6
    assert (cases["hours"] - cases["volume"] * cases["hours_per_case"]).abs().max() < 1e-4
    merged = cases.merge(standards, left_on=["office", "activity", "skill"],
                         right_on=["office", "case_type", "skill"], suffixes=("", "_std"))
    assert len(merged) == len(cases)
    assert (merged["hours_per_case"] - merged["hours_per_case_std"]).abs().max() < 1e-3
    assert (trace["fte"] - trace["hours"] / trace["hours_per_fte"]).abs().max() < 1e-7
    # Each demand FTE = (sum of volume x hours per case + non-case hours) / hours per FTE.
    recomputed = trace.assign(
        parts=trace["volume"].fillna(0) * trace["hours_per_case"].fillna(0)
        + trace["hours"].where(trace["kind"] == "non_case", 0.0))
    by_key = recomputed.groupby(["office", "skill", "period"]).agg(
        hours=("parts", "sum"), hours_per_fte=("hours_per_fte", "first"))
    assert len(by_key) == len(instance.demand)
    for d in instance.demand:
        row = by_key.loc[(d.office, d.skill, instance.periods[d.period].name)]
        assert d.fte == pytest.approx(row["hours"] / row["hours_per_fte"], abs=1e-4)


def test_backtest_and_qc_report(demand_run: Path) -> None:
    report = demand_run / "demand_report"
    backtest = pd.read_csv(report / "backtest.csv")
    assert len(backtest) == 30
    for column in ("holdout_mase_baseline", "holdout_mase_chosen", "selection_mase_holt_winters",
                   "selection_mase_snaive_drift", "chosen", "beats_baseline"):
        assert column in backtest.columns
    # Done-when of issue 4: the chosen method beats the baseline on most demo series.
    assert backtest["beats_baseline"].sum() > len(backtest) / 2
    forecasts = pd.read_csv(report / "forecasts.csv")
    assert ((forecasts["lower"] <= forecasts["volume"])
            & (forecasts["volume"] <= forecasts["upper"])).all()
    summary = pd.read_csv(report / "qc_summary.csv").set_index("check")
    assert summary.loc["kept", "records"] > 0
    assert (report / "qc_verdict.txt").read_text().startswith("good")


def _edit(path: Path, row: int, column: str, value: str) -> None:
    with path.open(newline="") as handle:
        rows = list(csv.reader(handle))
    rows[row - 1][rows[0].index(column)] = value
    with path.open("w", newline="") as handle:
        csv.writer(handle, lineterminator="\n").writerows(rows)


BROKEN = [
    # file, spreadsheet row, column, new value, expected message start
    ("case_arrivals.csv", 5, "count", "lots", "case_arrivals.csv:5: count: 'lots' is not a number"),
    ("case_arrivals.csv", 7, "office", "atlantis", "case_arrivals.csv:7: office: unknown office"),
    ("case_arrivals.csv", 9, "month", "2026-13", "case_arrivals.csv:9: month: '2026-13' is not a "
     "month"),
    ("time_records.csv", 3, "hours", "eight", "time_records.csv:3: hours: 'eight' is not a number"),
    ("time_records.csv", 4, "skill", "juggling", "time_records.csv:4: skill: unknown skill"),
    ("expected_hours.csv", 6, "expected_hours", "-5", "expected_hours.csv:6: expected_hours: "
     "'-5' is out of range"),
    ("activities.csv", 3, "kind", "sometimes", "activities.csv:3: kind: unknown kind"),
]


def test_bad_history_lists_every_problem_and_writes_nothing(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    for name, row, column, value, _ in BROKEN:
        _edit(history / name, row, column, value)
    instance = _instance_without_demand(tmp_path / "instance")
    (instance / "demand.csv").write_text("office,skill,period,fte\n")
    before = sorted(p.name for p in instance.iterdir())
    code = main(["demand", str(history), "-o", str(instance)])
    err = capsys.readouterr().err
    assert code == EXIT_INVALID_INPUT
    for *_, message in BROKEN:
        assert message in err, message
    assert "nothing was written" in err and "Traceback" not in err
    assert sorted(p.name for p in instance.iterdir()) == before
    assert (instance / "demand.csv").read_text() == "office,skill,period,fte\n"


def test_a_number_split_by_a_comma_is_an_error_not_its_first_part(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    # A sweep wrote hours "11,5" unquoted: the row gained a cell and 11 was read silently.
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    lines = (history / "time_records.csv").read_text().splitlines()
    cells = lines[1].split(",")
    lines[1] = ",".join([*cells[:-1], "11", "5"])  # row 2's hours, decimal comma
    (history / "time_records.csv").write_text("\n".join(lines) + "\n")
    instance = _instance_without_demand(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(instance)]) == EXIT_INVALID_INPUT
    assert ("time_records.csv:2: more cells than the header's 6 columns"
            in capsys.readouterr().err)
    assert not (instance / "demand.csv").exists()


def test_a_rejected_count_is_not_reported_again_as_a_missing_month(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    _edit(history / "case_arrivals.csv", 10, "count", "-3")
    instance = _instance_without_demand(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(instance)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "case_arrivals.csv:10: count: '-3' is out of range" in err
    assert "has no row for" not in err, err


def test_missing_months_and_files_are_reported(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    (history / "expected_hours.csv").unlink()
    lines = (history / "case_arrivals.csv").read_text().splitlines(keepends=True)
    (history / "case_arrivals.csv").write_text("".join(lines[:10] + lines[11:]))  # drop a month
    instance = _instance_without_demand(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(instance)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "expected_hours.csv: file is missing" in err
    assert "has no row for 2020-10" in err
    assert not (instance / "demand.csv").exists()


def test_no_usable_time_records_is_invalid_input(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    expected = pd.read_csv(history / "expected_hours.csv")
    expected["expected_hours"] = 1  # every timesheet is now over-reported, so all excluded
    expected.to_csv(history / "expected_hours.csv", index=False)
    instance = _instance_without_demand(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(instance)]) == EXIT_INVALID_INPUT
    assert "no time record passed quality control" in capsys.readouterr().err
    assert not (instance / "demand.csv").exists()


def test_instance_problems_are_reported_without_a_flood(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    instance = tmp_path / "instance"
    instance.mkdir()
    shutil.copy(DEMO / "skills.csv", instance / "skills.csv")
    (instance / "settings.toml").write_text(
        '[horizon]\nhours_per_fte = 450\n[[horizon.periods]]\nname = "FY27-P1"\nyear = "FY27"\n')
    assert main(["demand", str(DEMO_HISTORY), "-o", str(instance)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "offices.csv: file is missing" in err
    assert "period 'FY27-P1' is not a calendar quarter" in err
    assert "unknown office" not in err  # names are not checked against a missing table
    assert len(err.splitlines()) < 10
    assert not (instance / "demand.csv").exists()



def test_written_files_have_the_mode_of_any_new_file(demand_run: Path, tmp_path: Path) -> None:
    # Written under temporary names and renamed into place; none may keep a private mode
    # (mkstemp's 0600, mkdtemp's 0700), and no temporary is left behind.
    (tmp_path / "plain.csv").write_text("")
    (tmp_path / "plain").mkdir()
    for name in ("demand.csv", "demand_trace.csv"):
        assert (demand_run / name).stat().st_mode == (tmp_path / "plain.csv").stat().st_mode
    assert (demand_run / "demand_report").stat().st_mode == (tmp_path / "plain").stat().st_mode
    assert not [p.name for p in demand_run.iterdir() if p.name.startswith(".")]


def test_work_the_demand_leaves_out_is_said_and_a_series_of_no_cases_takes_the_pool(
        tmp_path: Path) -> None:
    # A sweep: an all-zero series got a standard 23 times the pooled one ((h + k pooled) / k
    # with no cases) and its booked hours left the demand without a word; a case type with no
    # hours booked vanished silently too.
    from rebalance.demand import run_demand

    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    arrivals = pd.read_csv(history / "case_arrivals.csv")
    zero = (arrivals["office"] == "aldercombe") & (arrivals["case_type"] == "minor_permit")
    arrivals.loc[zero, "count"] = 0
    arrivals.to_csv(history / "case_arrivals.csv", index=False)
    records = pd.read_csv(history / "time_records.csv")
    records[records["activity"] != "appeal"].to_csv(history / "time_records.csv", index=False)
    result = run_demand(history, _instance_without_demand(tmp_path / "instance"))
    said = [str(w) for w in result.warnings]
    assert any("'aldercombe', case type 'minor_permit' has no cases" in w for w in said), said
    assert any("case type 'appeal' has arrivals but no hours booked" in w for w in said), said
    table = result.standards.table
    row = table[(table["office"] == "aldercombe") & (table["case_type"] == "minor_permit")]
    assert len(row) and (row["weight"] == 0).all()
    assert (row["hours_per_case"] - row["pooled_hours_per_case"]).abs().max() < 1e-9


@pytest.mark.parametrize("refused", ["demand_trace.csv", "demand_report"])
def test_an_output_folder_that_cannot_be_written_is_a_refused_output_with_nothing_written(
        refused: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    # OUT there but not writable had ended as "internal error: PermissionError", exit 1; a
    # refused output is exit 2 (README, exit codes).  The session runs as root, which chmod
    # does not stop, so the write itself raises what the system would (errno 13, EACCES, as
    # open(2) documents for a folder without write permission).  demand_trace.csv: the
    # second file, with demand.csv already staged beside it; demand_report: the report's
    # folder, after both.
    out = _instance_without_demand(tmp_path / "instance")
    before = sorted(p.name for p in out.iterdir())
    write = pd.DataFrame.to_csv

    def to_csv(frame: pd.DataFrame, path: object = None, *args: object, **kwargs: object) -> object:
        if isinstance(path, Path) and refused in str(path):
            raise PermissionError(13, "Permission denied", str(path))
        return write(frame, path, *args, **kwargs)  # type: ignore[call-overload]

    monkeypatch.setattr(pd.DataFrame, "to_csv", to_csv)
    assert main(["demand", str(DEMO_HISTORY), "-o", str(out)]) == EXIT_USAGE
    err = capsys.readouterr().err
    said = out / "demand_report" if refused == "demand_report" else out
    assert f"{said}: cannot be written (Permission denied); nothing was written" in err, err
    assert "internal error" not in err and ".tmp" not in err
    assert sorted(p.name for p in out.iterdir()) == before  # no temporary left behind either


def test_an_office_unknown_in_many_history_rows_is_said_once(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    # Said once with its rows, as the instance's own tables say such a name: grouped on the
    # name the problem carries (tables.collapse_repeats), no longer on its message's words,
    # so the history reader must hand the name over (without it: ten lines and "N more").
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    for row in range(2, 14):
        _edit(history / "case_arrivals.csv", row, "office", "atlantis")
    instance = _instance_without_demand(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(instance)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert err.count("'atlantis'") == 1, err
    assert ("office 'atlantis' is not in the instance's offices.csv but is named in 12 rows"
            in err)
    assert "more rows like this" not in err


def test_a_rename_that_fails_late_says_what_was_written(tmp_path: Path, capsys,  # type: ignore[no-untyped-def]
                                                        monkeypatch) -> None:
    # demand.csv goes in first; if demand_trace.csv's rename then fails, the message had
    # said only the report was written while demand.csv was new already.
    import os

    import rebalance.files as files_module

    instance = _instance_without_demand(tmp_path / "instance")
    real = os.replace

    def replace(src, dst):  # type: ignore[no-untyped-def]
        if str(dst).endswith("demand_trace.csv"):
            raise PermissionError(13, "Permission denied")
        return real(src, dst)

    monkeypatch.setattr(files_module.os, "replace", replace)
    assert main(["demand", str(DEMO_HISTORY), "-o", str(instance)]) != EXIT_OK
    err = capsys.readouterr().err
    assert "and demand.csv were written, but not demand_trace.csv" in err, err
    assert (instance / "demand.csv").read_text() != "office,skill,period,fte\n"
    assert not (instance / "demand_trace.csv").exists()
    assert not [p for p in instance.iterdir() if p.name.startswith(".")]
