"""`rebalance demand` on a small made-up history: a review's findings (work left out without a
word, adjustment rows that change nothing, messages that hid a problem or its place)."""

from __future__ import annotations

from pathlib import Path

import pytest
from test_demand_settings import _make

from rebalance.cli import EXIT_INVALID_INPUT, EXIT_OK, main


def _add_office(inst: Path, hist: Path, office: str, hours: float, *,
                arrivals: bool = True) -> None:
    """Office ``office`` in the instance; with ``arrivals``, A's cases again and a person
    booking ``hours`` to cases and 10 to training each record month."""
    with (inst / "offices.csv").open("a") as f:
        f.write(f"{office},L{office},,\n")
    if not arrivals:
        return
    lines = (hist / "case_arrivals.csv").read_text().splitlines()[1:]
    with (hist / "case_arrivals.csv").open("a") as f:
        f.writelines(line.replace(",A,", f",{office},") + "\n" for line in lines)
    months = [line.split(",")[1] for line in
              (hist / "time_records.csv").read_text().splitlines()[1:]]
    with (hist / "time_records.csv").open("a") as f:
        f.writelines(f"q{office},{m},{office},review,permit,{hours}\n"
                     f"q{office},{m},{office},review,training,10\n" for m in months)
    with (hist / "expected_hours.csv").open("a") as f:
        f.writelines(f"q{office},{m},{hours + 10}\n" for m in months)


def _run(inst: Path, hist: Path, capsys: pytest.CaptureFixture[str]) -> str:
    code = main(["demand", str(hist), "-o", str(inst)])
    err = capsys.readouterr().err
    assert code == EXIT_OK, err
    return err


def test_an_office_with_no_usable_records_is_said_to_have_no_noncase_work(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Review: an office whose every record is excluded (hours x60, as if minutes) lost all its
    # non-case work without a word, while its case work took the pooled value with warnings.
    # Common practice: work left out of a forecast is said.
    inst, hist = _make(tmp_path)
    _add_office(inst, hist, "B", 150 * 60)  # 9,000 h a record: out of bounds (above 200)
    err = _run(inst, hist, capsys)
    assert ("office 'B' has no usable time records (none, or none that passed quality "
            "control), so no non-case work could be estimated for it; its demand holds case "
            "work only") in err
    trace = (inst / "demand_trace.csv").read_text().splitlines()
    assert not [line for line in trace if line.startswith("B,") and ",non_case," in line]
    assert [line for line in trace if line.startswith("B,") and ",case," in line]


def test_offices_of_the_instance_with_no_history_are_named(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Review: a two-office history written into a six-office instance left four offices
    # with no demand rows, unsaid.  An office with history gets rows and is not named.
    inst, hist = _make(tmp_path)
    _add_office(inst, hist, "B", 150)
    _add_office(inst, hist, "C", 0, arrivals=False)
    _add_office(inst, hist, "D", 0, arrivals=False)
    err = _run(inst, hist, capsys)
    assert ("offices.csv: office: 2 office(s) of the instance get no rows in demand.csv (no "
            "case arrivals or time records of theirs in the history): 'C', 'D'") in err
    offices = {line.split(",")[0] for line in
               (inst / "demand.csv").read_text().splitlines()[1:]}
    assert offices == {"A", "B"}


def test_an_adjustment_outside_the_horizon_is_said(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Review: a row wholly before or after the plan (2027-01 to 2027-12 here) passed silently.
    inst, hist = _make(tmp_path)
    (hist / "adjustments.csv").write_text(
        "office,case_type,first_month,last_month,factor,note\n"
        "A,,2026-01,2026-03,2,too early\n"
        "A,permit,2027-06,2028-02,2,overlaps: fine\n"
        "A,,2028-01,2028-03,2,too late\n")
    err = _run(inst, hist, capsys)
    assert ("adjustments.csv:2: first_month, last_month: 2026-01 to 2026-03 is outside the "
            "plan horizon (2027-01 to 2027-12); the row changes nothing") in err
    assert ("adjustments.csv:4: first_month, last_month: 2028-01 to 2028-03 is outside the "
            "plan horizon (2027-01 to 2027-12)") in err
    assert "adjustments.csv:3:" not in err


def test_every_problem_of_a_row_is_listed_with_its_column(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Review: reversed months went unsaid beside a bad factor, and a duplicate row's line
    # had no column part (docs/instance-format.md: `file:row: column: message`).
    inst, hist = _make(tmp_path)
    (hist / "adjustments.csv").write_text(
        "office,case_type,first_month,last_month,factor,note\nA,,2027-09,2027-07,-1,\n")
    lines = (hist / "case_arrivals.csv").read_text().splitlines()
    (hist / "case_arrivals.csv").write_text("\n".join([*lines, lines[5]]) + "\n")
    with (hist / "expected_hours.csv").open("a") as f:
        f.write("p1,2026-05,150\n")
    code = main(["demand", str(hist), "-o", str(inst)])
    err = capsys.readouterr().err
    assert code == EXIT_INVALID_INPUT, err
    assert "adjustments.csv:2: factor: '-1' is out of range" in err
    assert ("adjustments.csv:2: last_month: 2027-07 is before first_month 2027-09; expected "
            "a month on or after it") in err
    assert (f"case_arrivals.csv:{len(lines) + 1}: office, case_type, month: arrivals for "
            "office 'A', case type 'permit', month ") in err
    assert "expected_hours.csv:26: person, period: expected hours for 'p1' in 2026-05" in err


def test_the_count_of_more_rows_follows_its_examples(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Review: "(and N more rows like this)" came after every other file's problems, away from
    # the ten rows it continues.
    inst, hist = _make(tmp_path)
    lines = (hist / "case_arrivals.csv").read_text().splitlines()
    lines[1:13] = [line.rsplit(",", 1)[0] + ",-1" for line in lines[1:13]]
    (hist / "case_arrivals.csv").write_text("\n".join(lines) + "\n")
    (hist / "time_records.csv").write_text(
        (hist / "time_records.csv").read_text().replace(",150\n", ",abc\n", 1))
    code = main(["demand", str(hist), "-o", str(inst)])
    err = capsys.readouterr().err.splitlines()
    assert code == EXIT_INVALID_INPUT
    counted = [i for i, line in enumerate(err) if "(and 2 more rows like this)" in line]
    assert len(counted) == 1, err
    assert "case_arrivals.csv:11: count:" in err[counted[0] - 1]
    assert "time_records.csv:2: hours:" in err[counted[0] + 1]


@pytest.mark.parametrize(("written", "read"), [("0.123456789", "0.123456789"),
                                                ("1e6", "1000000"), ("2.0", "2")])
def test_priorities_are_written_with_every_digit(
        tmp_path: Path, capsys: pytest.CaptureFixture[str], written: str, read: str) -> None:
    # Review: {:g} wrote 0.123456789 as 0.123457 and 1e6 as 1e+06.
    inst, hist = _make(tmp_path, demand_toml=f"[priority]\nreview = {written}\n")
    _run(inst, hist, capsys)
    rows = (inst / "demand.csv").read_text().splitlines()[1:]
    assert rows and all(r.endswith(f",{read}") for r in rows), rows
