"""Reading instances: every bad input gets file:row: column and what was expected, all at once,
with a non-zero exit and nothing written; conversions and warnings."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from conftest import DATA

from rebalance import InstanceError, read_instance
from rebalance.cli import EXIT_INVALID_INPUT, main

BAD = DATA / "bad"


def overlay(case: Path, target: Path) -> Path:
    """The tiny instance with the case's files laid over it (and REMOVE'd files deleted)."""
    shutil.copytree(DATA / "tiny", target)
    for file in case.iterdir():
        if file.name in ("expect.txt", "REMOVE"):
            continue
        shutil.copy(file, target / file.name)
    if (case / "REMOVE").exists():
        for name in (case / "REMOVE").read_text().split():
            (target / name).unlink()
    return target


@pytest.mark.parametrize("case", sorted(p.name for p in BAD.iterdir()))
def test_bad_input_is_reported_in_full_and_nothing_is_written(case, tmp_path, capsys):
    instance = overlay(BAD / case, tmp_path / "instance")
    out = tmp_path / "out"
    code = main(["plan", str(instance), "-o", str(out), "-q"])
    err = capsys.readouterr().err
    assert code == EXIT_INVALID_INPUT
    assert "Traceback" not in err
    for expected in (BAD / case / "expect.txt").read_text().splitlines():
        assert expected in err, f"missing message: {expected}\n--- got:\n{err}"
    assert not out.exists()
    assert not list(tmp_path.glob(".out*"))  # no half-written staging folder either


def test_a_missing_folder_or_unreadable_settings_is_said_once(tmp_path):
    # Each had also drawn "settings.toml: horizon: give either periods = ..." (a sweep).
    for path, expected in ((tmp_path / "nope", "instance folder not found"),
                           (DATA / "tiny" / "staff.csv", "is a file; expected an instance")):
        with pytest.raises(InstanceError) as caught:
            read_instance(path)
        assert [p.message for p in caught.value.problems] == [
            next(p.message for p in caught.value.problems if expected in p.message)]
    (tmp_path / "empty").mkdir()
    with pytest.raises(InstanceError) as caught:
        read_instance(tmp_path / "empty")
    assert all(p.message == "file is missing" for p in caught.value.problems)


def test_all_problems_come_at_once():
    with pytest.raises(InstanceError) as caught:
        read_instance_with_many_problems()
    files = {p.file for p in caught.value.problems}
    assert {"staff.csv", "skills.csv"} <= files


def read_instance_with_many_problems():
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        target = overlay(BAD / "fte_and_proficiency", Path(tmp) / "i")
        shutil.copy(BAD / "bad_numbers" / "skills.csv", target / "skills.csv")
        return read_instance(target)


def test_hours_convert_with_hours_per_fte(tmp_path):
    # 2,087 hours is the work year used as the hourly-rate divisor for full-time staff in
    # 5 U.S.C. 5504(b) (from memory); a quarter is a fourth of it: 521.75 hours per FTE.
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    settings = (target / "settings.toml").read_text().replace("hours_per_fte = 480",
                                                             "hours_per_fte = 521.75")
    (target / "settings.toml").write_text(settings)
    (target / "demand.csv").write_text(
        "office,skill,period,hours\nA,review,2027-Q1,2087\nB,review,2027-Q2,521.75\n")
    instance = read_instance(target)
    assert [d.fte for d in instance.demand] == pytest.approx([4.0, 1.0])
    assert [d.hours for d in instance.demand] == [2087.0, 521.75]


def test_explicit_periods_with_their_own_hours(tmp_path):
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    (target / "settings.toml").write_text(
        '[horizon]\nperiods_per_year = 2\n'
        '[[horizon.periods]]\nname = "H1"\nyear = "2027"\nhours_per_fte = 900\n'
        '[[horizon.periods]]\nname = "H2"\nyear = "2027"\nhours_per_fte = 850\n')
    (target / "demand.csv").write_text("office,skill,period,hours\nA,review,H1,900\n"
                                       "A,review,H2,425\n")
    (target / "staff.csv").write_text("person,home_office,fte,skills\nx,A,1,review\n")
    instance = read_instance(target)
    assert [d.fte for d in instance.demand] == pytest.approx([1.0, 0.5])
    assert instance.periods_per_year == 2


def test_warnings_do_not_stop_a_solve(tmp_path):
    target = overlay(BAD / "empty_demand", tmp_path / "i")
    (target / "demand.csv").write_text("office,skill,period,fte\nA,review,2027-Q1,1\n"
                                       "A,intake,2027-Q2,0.5\n")
    (target / "staff.csv").write_text("person,home_office,fte,skills\nx,A,1,review\n")
    instance = read_instance(target)
    text = "\n".join(instance.warnings)
    assert "nobody on staff has skill 'intake'" in text
    assert "office 'B' has no staff" in text


def test_instance_is_read_only(tiny):
    with pytest.raises(TypeError):
        tiny.vacancies[("A", "review")] = 3  # type: ignore[index]
    with pytest.raises(AttributeError):
        tiny.name = "other"  # type: ignore[misc]


def test_one_fault_on_many_rows_is_listed_ten_times_and_counted(tmp_path):
    # A renamed office leaves every row naming it unknown (a sweep's workbook: 675 problems,
    # nearly all the same few names); each row is still counted.
    from conftest import ROOT

    demo = tmp_path / "demo"
    shutil.copytree(ROOT / "instances" / "demo", demo)
    offices = (demo / "offices.csv").read_text()
    (demo / "offices.csv").write_text(offices.replace("hollin-cross,", "hollin-crossing,"))
    staff_rows = sum(1 for line in (demo / "staff.csv").read_text().splitlines()[1:]
                     if ",hollin-cross," in line)
    with pytest.raises(InstanceError) as caught:
        read_instance(demo)
    text = [str(p) for p in caught.value.problems]
    named = [t for t in text if t.startswith("staff.csv") and "'hollin-cross'" in t]
    assert staff_rows > 11 and len(named) == 11
    assert named[-1].endswith(f"(and {staff_rows - 10} more rows like this)")
