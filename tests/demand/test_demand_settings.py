"""`rebalance demand` on a small made-up history: demand.toml ranges, absurd magnitudes,
every problem at once, and an output that is not an instance folder (a sweep's findings)."""

from __future__ import annotations

from pathlib import Path

import pytest

from rebalance.cli import EXIT_INVALID_INPUT, EXIT_OK, EXIT_USAGE, main

OLD_DEMAND = "office,skill,period,hours\nA,review,2027-Q1,100\n"


def _months(first: tuple[int, int], count: int) -> list[str]:
    year, month = first
    out = []
    for _ in range(count):
        out.append(f"{year:04d}-{month:02d}")
        year, month = (year + 1, 1) if month == 12 else (year, month + 1)
    return out


def _make(tmp: Path, *, arrival_months: int = 60, start: str = "2027-Q1",
          count: str = "100", demand_toml: str | None = None,
          record_months: int = 24) -> tuple[Path, Path]:
    """An instance of one office and skill, and a history ending 2026-12."""
    inst, hist = tmp / "inst", tmp / "hist"
    inst.mkdir()
    hist.mkdir()
    (inst / "settings.toml").write_text(
        f'[horizon]\nstart = "{start}"\ncount = 4\nhours_per_fte = 450\n')
    (inst / "offices.csv").write_text("office,location,seats,max_hires_per_period\nA,LA,,\n")
    (inst / "skills.csv").write_text(
        "skill,salary_per_period,onboarding_cost,time_to_hire,ramp\nreview,10000,1000,0,\n")
    (inst / "staff.csv").write_text("person,home_office,fte,skills\np1,A,1.0,review:1.0\n")
    (inst / "budget.csv").write_text("year,hiring,moves\n2027,0,0\n")
    (inst / "demand.csv").write_text(OLD_DEMAND)
    first = 2027 * 12 - arrival_months
    arrivals = _months((first // 12, first % 12 + 1), arrival_months)
    (hist / "case_arrivals.csv").write_text(
        "month,office,case_type,count\n" + "".join(f"{m},A,permit,{count}\n" for m in arrivals))
    first = 2027 * 12 - 24
    records = _months((first // 12, first % 12 + 1), record_months)
    (hist / "time_records.csv").write_text(
        "person,period,office,skill,activity,hours\n"
        + "".join(f"p1,{m},A,review,permit,150\n" for m in records))
    (hist / "expected_hours.csv").write_text(
        "person,period,expected_hours\n" + "".join(f"p1,{m},150\n" for m in records))
    (hist / "activities.csv").write_text("activity,kind,description\npermit,case,\n"
                                         "training,non_case,\n")
    if demand_toml is not None:
        (hist / "demand.toml").write_text(demand_toml)
    return inst, hist


def _edit(path: Path, row: int, column: int, value: str) -> None:
    lines = path.read_text().splitlines()
    cells = lines[row - 1].split(",")
    cells[column] = value
    lines[row - 1] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")


def _refused(inst: Path, hist: Path, capsys: pytest.CaptureFixture[str]) -> str:
    code = main(["demand", str(hist), "-o", str(inst)])
    err = capsys.readouterr().err
    assert code == EXIT_INVALID_INPUT, err
    assert "Traceback" not in err and "internal error" not in err, err
    assert "nothing was written" in err
    assert (inst / "demand.csv").read_text() == OLD_DEMAND
    assert not (inst / "demand_report").exists()
    return err


def test_the_small_history_builds(tmp_path: Path) -> None:
    inst, hist = _make(tmp_path)
    assert main(["demand", str(hist), "-o", str(inst)]) == EXIT_OK
    assert (inst / "demand.csv").read_text() != OLD_DEMAND


BAD_SETTINGS = [
    # Each had ended in an internal error (exit 1) or passed unchecked.
    ("[forecast]\ninterval_level = 1.5\n",
     "forecast.interval_level: '1.5' is out of range; expected a number above 0 and below 1"),
    ("[forecast]\ninterval_level = nan\n",
     "forecast.interval_level: 'nan' is out of range; expected a number above 0 and below 1"),
    ("[standards]\ninterval_level = 1.5\n",
     "standards.interval_level: '1.5' is out of range; expected a number above 0 and below 1"),
    ("[standards]\nbootstrap_samples = 0\n",
     "standards.bootstrap_samples: '0' is out of range; expected a whole number from 1 to "),
    ("[forecast]\nselection_origins = 0\n",
     "forecast.selection_origins: '0' is out of range; expected a whole number from 1 to "),
    ("[forecast]\nholdout_months = 0\n",
     "forecast.holdout_months: '0' is out of range; expected a whole number from 1 to "),
    ("[standards]\nshrinkage_cases = inf\n",
     "standards.shrinkage_cases: 'inf' is out of range; expected a number from 0 to "),
    ("[quality]\ncompliance_target = 2\n",
     "quality.compliance_target: '2' is out of range; expected a number from 0 to 1"),
    ("[quality]\nanomaly_window = 3\n",
     "quality.anomaly_min_reference: 6 is more than anomaly_window (3)"),
    ("[priority]\nreview = nan\n",
     "priority.review: 'nan' is out of range; expected a number from 0 to "),
    ("[forecast]\nholdout_months = 1.5\n",
     "forecast.holdout_months: '1.5' is out of range; expected a whole number"),
]


@pytest.mark.parametrize(("toml", "message"), BAD_SETTINGS)
def test_a_setting_out_of_range_is_an_input_error(tmp_path: Path, toml: str, message: str,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    inst, hist = _make(tmp_path, demand_toml=toml)
    assert "demand.toml: " + message in _refused(inst, hist, capsys)


def test_a_training_length_the_baseline_cannot_use_is_refused(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # 6 + 2 x 6 = 18 <= 24 months passed the length check, then the three-year baseline
    # failed with "needs 36 months" as an internal error.
    inst, hist = _make(tmp_path, arrival_months=24,
                       demand_toml="[forecast]\nmin_training_months = 6\nholdout_months = 6\n")
    err = _refused(inst, hist, capsys)
    assert ("demand.toml: forecast.min_training_months: '6' is out of range; expected a whole "
            "number from 36 to ") in err
    assert "has 24 months" not in err  # the length from a default would only confuse


def test_every_bad_setting_is_listed_at_once(tmp_path: Path,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    toml = ("[forecast]\ninterval_level = 1.5\nselection_origins = 0\n"
            "[standards]\nbootstrap_samples = 0\nseed = -1\n")
    inst, hist = _make(tmp_path, demand_toml=toml)
    err = _refused(inst, hist, capsys)
    assert "4 problems" in err
    for key in ("forecast.interval_level", "forecast.selection_origins",
                "standards.bootstrap_samples", "standards.seed"):
        assert f"demand.toml: {key}: " in err, key


def test_a_misspelt_section_is_an_error_naming_the_known_ones(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    inst, hist = _make(tmp_path, demand_toml="quality = 3\n[forcast]\n"
                                             "holdout_months = 6\n")
    err = _refused(inst, hist, capsys)
    assert ("demand.toml: forcast: unknown section; expected one of: priority, quality, "
            "standards, forecast (did you mean 'forecast'?)") in err
    assert "demand.toml: quality: '3' is not a section" in err


@pytest.mark.parametrize(("file", "row", "column", "message"), [
    ("case_arrivals.csv", 61, 3, "case_arrivals.csv:61: count: '1e300' is out of range"),
    ("time_records.csv", 2, 5, "time_records.csv:2: hours: '1e300' is out of range"),
    ("expected_hours.csv", 2, 2, "expected_hours.csv:2: expected_hours: '1e300' is out of "
                                 "range"),
])
def test_an_absurd_magnitude_is_an_input_error(tmp_path: Path, file: str, row: int,
                                               column: int, message: str,
                                               capsys: pytest.CaptureFixture[str]) -> None:
    # 1e300 hours had been written as a 300-digit number, 1e300 cases as rows of 0.00 hours.
    inst, hist = _make(tmp_path)
    _edit(hist / file, row, column, "1e300")
    err = _refused(inst, hist, capsys)
    assert message in err
    assert "months; expected at least" not in err  # the rejected row is no month short
    assert "RuntimeWarning" not in err


def test_an_empty_demand_never_replaces_the_old_one(tmp_path: Path,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    # No cases at all: every forecast is zero and demand.csv had been replaced by a header.
    inst, hist = _make(tmp_path, count="0")
    err = _refused(inst, hist, capsys)
    assert "demand.csv: the forecast gives no office and skill any hours" in err


def test_a_bad_cell_does_not_hide_the_horizon_checks(tmp_path: Path,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    inst, hist = _make(tmp_path, arrival_months=59, start="2026-Q4")
    _edit(hist / "expected_hours.csv", 5, 2, "abc")
    err = _refused(inst, hist, capsys)
    assert "expected_hours.csv:5: expected_hours: 'abc' is not a number" in err
    assert "case_arrivals.csv: month: history runs to 2026-12, into the plan horizon" in err
    assert "has 59 months; expected at least 60" in err
    assert "time_records.csv: period: records run to 2026-12, into the plan horizon" in err


def test_time_records_into_the_horizon_are_an_error(tmp_path: Path,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    inst, hist = _make(tmp_path, record_months=26)  # records to 2027-02, plan from 2027-01
    err = _refused(inst, hist, capsys)
    assert ("time_records.csv: period: records run to 2027-02, into the plan horizon (starts "
            "2027-01); expected records to end before the first period") in err


def test_an_output_that_is_a_workbook_file_is_said_plainly(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    _, hist = _make(tmp_path)
    book = tmp_path / "x.xlsx"
    book.write_bytes(b"PK")
    # -o names no instance folder: a refused output, exit 2 (README, exit codes).
    assert main(["demand", str(hist), "-o", str(book)]) == EXIT_USAGE
    err = capsys.readouterr().err
    assert (f"{book}: is a workbook, not a folder; expected the instance folder that "
            "demand.csv is written into") in err
    assert "or an .xlsx workbook" not in err
    assert book.read_bytes() == b"PK"


def test_an_output_folder_with_no_instance_is_said_once(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    _, hist = _make(tmp_path)
    folder = tmp_path / "dir.xlsx"
    folder.mkdir()
    assert main(["demand", str(hist), "-o", str(folder)]) == EXIT_USAGE
    err = capsys.readouterr().err
    assert f"{folder}: is a folder with no instance in it (no settings.toml" in err
    assert "workbook not found" not in err and "file is missing" not in err
    assert not any(folder.iterdir())


def test_an_instance_file_not_in_utf8_is_said_as_such(tmp_path: Path,
                                                      capsys: pytest.CaptureFixture[str]) -> None:
    # A sweep: a Latin-1 offices.csv read as "office: required column is missing".
    inst, hist = _make(tmp_path)
    (inst / "offices.csv").write_bytes("office,location,seats,max_hires_per_period\n"
                                       "A,Lyng\u00e9,,\n".encode("latin-1"))
    err = _refused(inst, hist, capsys)
    assert "offices.csv:2: is not UTF-8 text" in err and "required column" not in err


def test_a_month_far_above_its_series_is_said_and_kept(tmp_path: Path,
                                                       capsys: pytest.CaptureFixture[str]) -> None:
    # A sweep: one month typed 10,000 for 100 made a quarter about twelve times the last,
    # without a word.  Common practice: flag it for review, and forecast from the data as
    # given (a real surge looks the same).
    inst, hist = _make(tmp_path)
    _edit(hist / "case_arrivals.csv", 50, 3, "10000")
    assert main(["demand", str(hist), "-o", str(inst)]) == EXIT_OK
    err = capsys.readouterr().err
    assert "10,000 cases, over 5 times its usual month (100)" in err


def test_a_whole_float_is_a_whole_number_in_demand_toml(tmp_path: Path) -> None:
    # A docs sweep: anomaly_window = 6.0 was refused though a cell of 6.0 reads as whole.
    from rebalance.demand.history import _read_settings

    file = tmp_path / "demand.toml"
    file.write_text("[quality]\nanomaly_window = 8.0\n[forecast]\nholdout_months = 6.0\n")
    problems: list = []
    settings = _read_settings(file, None, problems)
    assert problems == []
    assert settings.quality.anomaly_window == 8 and type(settings.quality.anomaly_window) is int
    assert type(settings.forecast.holdout_months) is int


def test_a_history_header_typed_with_capitals_and_spaces_reads_the_same_demand(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # A planner's "Office" or " period " had drawn "required column is missing", though the
    # instance's tables read such names (docs/instance-format.md: column names are read
    # ignoring case).  The reference is the same history with its headers as written by
    # _make; no outside figure is involved.
    (tmp_path / "plain").mkdir()
    (tmp_path / "typed").mkdir()
    plain_inst, plain_hist = _make(tmp_path / "plain")
    typed_inst, typed_hist = _make(tmp_path / "typed")
    for file in typed_hist.glob("*.csv"):
        header, rest = file.read_text().split("\n", 1)
        typed = ",".join(f" {name.capitalize()} " if i % 2 else name.upper()
                         for i, name in enumerate(header.split(",")))
        file.write_text(typed + "\n" + rest)
    assert (typed_hist / "time_records.csv").read_text().startswith(
        "PERSON, Period ,OFFICE, Skill ,ACTIVITY, Hours \n")
    assert main(["demand", str(plain_hist), "-o", str(plain_inst)]) == EXIT_OK
    plain_err = capsys.readouterr().err
    assert main(["demand", str(typed_hist), "-o", str(typed_inst)]) == EXIT_OK
    typed_err = capsys.readouterr().err
    assert "required column" not in typed_err and "unknown column" not in typed_err
    assert typed_err.replace(str(typed_hist), "H").replace(str(typed_inst), "I") == (
        plain_err.replace(str(plain_hist), "H").replace(str(plain_inst), "I"))
    for name in ("demand.csv", "demand_trace.csv"):
        assert (typed_inst / name).read_text() == (plain_inst / name).read_text()
